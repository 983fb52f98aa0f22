using System.Diagnostics;
using System.Globalization;
using Spectre.Console;

namespace VectorKit.Cli;

/// <summary>
/// Progress of one long step on the error stream: a Spectre.Console bar with rate and time left on a terminal, or a
/// plain line every two seconds when the error stream is redirected (logs, CI), so no escape codes land in files.
/// </summary>
/// <remarks>Thread-safe: <see cref="Advance"/> may be called from worker threads.</remarks>
internal sealed class ProgressLine : IDisposable
{
    private static readonly TimeSpan s_plainInterval = TimeSpan.FromSeconds(2);
    private readonly string _what;
    private readonly string _unit;
    private readonly long _total;
    private readonly TextWriter _error;
    private readonly Stopwatch _clock = Stopwatch.StartNew();
    private readonly Lock _gate = new();
    private readonly Task? _live;
    private readonly TaskCompletionSource? _stop;
    private ProgressTask? _task;
    private long _done;
    private TimeSpan _lastPlain;

    public ProgressLine(string what, string unit, long total, TextWriter error, bool quiet)
    {
        _what = what;
        _unit = unit;
        _total = Math.Max(1, total);
        _error = error;
        if (quiet)
        {
            _lastPlain = TimeSpan.MaxValue;
            return;
        }

        if (ReferenceEquals(error, Console.Error) && !Console.IsErrorRedirected)
        {
            var console = AnsiConsole.Create(new AnsiConsoleSettings { Out = new AnsiConsoleOutput(Console.Error) });
            var ready = new TaskCompletionSource();
            _stop = new TaskCompletionSource(TaskCreationOptions.RunContinuationsAsynchronously);
            _live = console.Progress()
                .AutoClear(false)
                .Columns(new TaskDescriptionColumn(), new ProgressBarColumn(), new PercentageColumn(), new RateColumn(unit), new RemainingTimeColumn())
                .StartAsync(async context =>
                {
                    _task = context.AddTask(what, maxValue: _total);
                    ready.SetResult();
                    await _stop.Task.ConfigureAwait(false);
                    _task.Value = Interlocked.Read(ref _done);
                    context.Refresh();
                });
            ready.Task.Wait();
        }
    }

    public void Advance(long count) => Show(Interlocked.Add(ref _done, count));

    /// <summary>
    /// A progress sink for one library call that reports "done so far" from worker threads (values may arrive out of
    /// order): the line shows <paramref name="before"/> plus the largest value seen.
    /// </summary>
    public IProgress<int> Within(long before) => new Sink(this, before);

    /// <summary>Moves the count to <paramref name="done"/> if that is further than it is.</summary>
    public void AtLeast(long done)
    {
        long seen = Interlocked.Read(ref _done);
        while (done > seen)
        {
            long was = Interlocked.CompareExchange(ref _done, done, seen);
            if (was == seen)
            {
                Show(done);
                return;
            }

            seen = was;
        }
    }

    private void Show(long done)
    {
        if (_task is not null)
        {
            _task.Value = done;
            return;
        }

        TimeSpan now = _clock.Elapsed;
        lock (_gate)
        {
            if (_lastPlain == TimeSpan.MaxValue || (now - _lastPlain < s_plainInterval && done < _total))
            {
                return;
            }

            _lastPlain = now;
        }

        double rate = done / Math.Max(now.TotalSeconds, 1e-3);
        double left = rate > 0 ? (_total - done) / rate : double.NaN;
        _error.WriteLine(string.Create(CultureInfo.InvariantCulture,
            $"{_what}: {done:N0}/{_total:N0} {_unit} ({100.0 * done / _total:F0} %), {rate:N0} {_unit}/s, {FormatSeconds(left)} left"));
    }

    public void Dispose()
    {
        if (_stop is not null)
        {
            _stop.TrySetResult();
            _live!.Wait();
        }
    }

    private static string FormatSeconds(double seconds)
        => double.IsNaN(seconds) ? "?" : TimeSpan.FromSeconds(Math.Round(seconds)).ToString(seconds >= 3600 ? @"h\:mm\:ss" : @"m\:ss", CultureInfo.InvariantCulture);

    private sealed class Sink(ProgressLine line, long before) : IProgress<int>
    {
        public void Report(int value) => line.AtLeast(before + value);
    }

    /// <summary>Items per second since the step started.</summary>
    private sealed class RateColumn(string unit) : ProgressColumn
    {
        public override Spectre.Console.Rendering.IRenderable Render(Spectre.Console.Rendering.RenderOptions options, ProgressTask task, TimeSpan deltaTime)
        {
            double rate = task.Speed ?? 0;
            return new Text(string.Create(CultureInfo.InvariantCulture, $"{rate:N0} {unit}/s"));
        }
    }
}
