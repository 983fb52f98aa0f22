using Xunit;

namespace VectorKit.Tests.TestData;

/// <summary>
/// A fact that needs the Fashion-MNIST files: skipped when they are missing, unless CI=true, in which case it runs
/// and fails with a message saying how to install the data.
/// </summary>
[AttributeUsage(AttributeTargets.Method, AllowMultiple = false)]
public sealed class DataFactAttribute : FactAttribute
{
    public DataFactAttribute()
    {
        if (!FashionMnist.IsAvailable && !FashionMnist.IsRequired)
        {
            Skip = FashionMnist.MissingMessage;
        }
    }
}
