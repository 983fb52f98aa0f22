namespace VectorKit.IO;

/// <summary>The stage of a <see cref="StreamingBuild"/>, in the order they run.</summary>
public enum StreamingBuildStage
{
    /// <summary>Reading the training rows; <see cref="StreamingBuildProgress.Completed"/> counts rows scanned up to the last training row.</summary>
    ReadingSample = 0,

    /// <summary>Training the index on the sample; reported once before (0 of 1) and once after (1 of 1).</summary>
    Training = 1,

    /// <summary>Adding the file's rows block by block; <see cref="StreamingBuildProgress.Completed"/> counts rows added.</summary>
    Adding = 2,
}
