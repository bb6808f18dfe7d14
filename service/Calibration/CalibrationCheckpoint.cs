using System.Text.Json;
using System.Text.Json.Serialization;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Models;

namespace Strayspot.Service.Calibration;

/// <summary>
/// Progress of a calibration run: how many frames (in sorted order) are folded into the running totals. Resuming
/// from it folds the remaining frames in the same order, so the result equals an unbroken run bit for bit.
/// </summary>
internal sealed class CalibrationCheckpoint
{
    [JsonPropertyName("modelSha256")] public string ModelSha256 { get; set; } = "";
    [JsonPropertyName("labelFiltered")] public bool LabelFiltered { get; set; }
    [JsonPropertyName("framesDone")] public int FramesDone { get; set; }
    /// <summary>Names of the frames done, to notice a changed frame folder.</summary>
    [JsonPropertyName("frames")] public List<string> Frames { get; set; } = [];
    [JsonPropertyName("count")] public long[] Count { get; set; } = [];
    [JsonPropertyName("mean")] public double[] Mean { get; set; } = [];
    [JsonPropertyName("m2")] public double[] M2 { get; set; } = [];

    private static readonly JsonSerializerOptions Options = new() { WriteIndented = false };

    public static CalibrationCheckpoint Capture(string modelSha, bool labelFiltered, IReadOnlyList<string> frames, int done, ClassStatisticsAccumulator acc)
    {
        var (count, mean, m2) = acc.ExportState();
        return new CalibrationCheckpoint
        {
            ModelSha256 = modelSha, LabelFiltered = labelFiltered, FramesDone = done,
            Frames = frames.Take(done).Select(Path.GetFileName).ToList()!, Count = count, Mean = mean, M2 = m2,
        };
    }

    public void Save(string path) => AtomicFile.Write(path, s => JsonSerializer.Serialize(s, this, Options));

    /// <summary>The checkpoint at <paramref name="path"/> if it belongs to this run; null when there is none.</summary>
    public static CalibrationCheckpoint? TryLoad(string path, string modelSha, bool labelFiltered, IReadOnlyList<string> frames, int classes)
    {
        if (!File.Exists(path)) return null;
        CalibrationCheckpoint? c;
        try
        {
            using var s = File.OpenRead(path);
            c = JsonSerializer.Deserialize<CalibrationCheckpoint>(s, Options);
        }
        catch (JsonException e)
        {
            throw new ModelException(ModelErrorCodes.CalibrationInvalid, $"Checkpoint '{path}' is unreadable ({e.Message}); delete it to start over.", e);
        }
        if (c is null) return null;
        string? why = null;
        if (c.ModelSha256 != modelSha) why = $"it was written for model {c.ModelSha256}, not {modelSha}";
        else if (c.LabelFiltered != labelFiltered) why = "it was written with a different label setting";
        else if (c.Count.Length != classes) why = $"it holds {c.Count.Length} classes, the model has {classes}";
        else if (c.FramesDone < 0 || c.FramesDone > frames.Count || c.Frames.Count != c.FramesDone) why = $"it claims {c.FramesDone} frames done of {frames.Count}";
        else
            for (int i = 0; i < c.FramesDone; i++)
                if (c.Frames[i] != Path.GetFileName(frames[i])) { why = $"frame {i} was '{c.Frames[i]}' and is now '{Path.GetFileName(frames[i])}'"; break; }
        if (why is not null)
            throw new ModelException(ModelErrorCodes.CalibrationInvalid, $"Checkpoint '{path}' does not match this run: {why}. Delete it to start over.");
        return c;
    }

    public ClassStatisticsAccumulator Restore() => ClassStatisticsAccumulator.FromState(Count, Mean, M2);
}
