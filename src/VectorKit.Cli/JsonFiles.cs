namespace VectorKit.Cli;

/// <summary>Small report files, written to a temporary name and renamed, so a failed run leaves no half file.</summary>
internal static class JsonFiles
{
    public static void WriteAtomically(string path, byte[] bytes)
    {
        string full = Path.GetFullPath(path);
        string folder = Path.GetDirectoryName(full) ?? ".";
        string temporary = Path.Combine(folder, $".{Path.GetFileName(full)}.{Guid.NewGuid():N}.tmp");
        try
        {
            File.WriteAllBytes(temporary, bytes);
            File.Move(temporary, full, overwrite: true);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            try
            {
                File.Delete(temporary);
            }
            catch (IOException)
            {
                // The original failure is the one to report.
            }

            throw new OutputFileException(full, e is DirectoryNotFoundException ? $"its folder '{folder}' does not exist" : e.Message, e);
        }
    }
}
