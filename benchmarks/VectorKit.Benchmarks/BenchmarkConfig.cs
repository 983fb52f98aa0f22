using BenchmarkDotNet.Columns;
using BenchmarkDotNet.Configs;
using BenchmarkDotNet.Diagnosers;
using BenchmarkDotNet.Attributes;
using BenchmarkDotNet.Jobs;
using BenchmarkDotNet.Reports;

namespace VectorKit.Benchmarks;

/// <summary>The configuration every benchmark class shares: allocations, categories, ratios against the baseline.</summary>
/// <remarks>
/// Jobs are not set here but per class (<see cref="KernelJobAttribute"/>, <see cref="SlowJobAttribute"/>): a job in
/// this config would run in addition to a class's own job instead of replacing it.
/// </remarks>
public static class BenchmarkConfig
{
    public static IConfig Create() => ManualConfig.Create(DefaultConfig.Instance)
        .AddDiagnoser(MemoryDiagnoser.Default)
        .AddColumn(CategoriesColumn.Default)
        .AddLogicalGroupRules(BenchmarkLogicalGroupRule.ByCategory, BenchmarkLogicalGroupRule.ByParams)
        .WithSummaryStyle(SummaryStyle.Default.WithRatioStyle(RatioStyle.Trend));
}

/// <summary>Short but repeated measurement for kernels that take micro- to milliseconds: 3 warm-up and 10 measured iterations.</summary>
/// <remarks>Kept short because the machine has 2 cores and is shared; the error column says when a re-run is needed.</remarks>
[AttributeUsage(AttributeTargets.Class | AttributeTargets.Assembly, AllowMultiple = true)]
public sealed class KernelJobAttribute : JobConfigBaseAttribute
{
    public KernelJobAttribute()
        : base(Job.Default.WithLaunchCount(1).WithWarmupCount(3).WithIterationCount(10).WithId("Kernel"))
    {
    }
}

/// <summary>For operations taking seconds: one warm-up and three measured iterations.</summary>
[AttributeUsage(AttributeTargets.Class | AttributeTargets.Assembly, AllowMultiple = true)]
public sealed class SlowJobAttribute : JobConfigBaseAttribute
{
    public SlowJobAttribute()
        : base(Job.Default.WithLaunchCount(1).WithWarmupCount(1).WithIterationCount(3).WithInvocationCount(1).WithUnrollFactor(1).WithId("Slow"))
    {
    }
}
