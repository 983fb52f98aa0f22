namespace VectorKit.Indexes;

/// <summary>An index that learns its structure from a sample was asked to add or search before it was trained.</summary>
public sealed class IndexNotTrainedException : InvalidOperationException
{
    /// <summary>Creates the exception with a message saying what to call first.</summary>
    /// <param name="message">What went wrong and what to do.</param>
    public IndexNotTrainedException(string message)
        : base(message)
    {
    }
}
