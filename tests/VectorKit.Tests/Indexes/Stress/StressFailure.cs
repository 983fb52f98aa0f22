namespace VectorKit.Tests.Indexes.Stress;

/// <summary>A check of the stress run that failed.</summary>
internal sealed class StressFailure(string message) : Exception(message);
