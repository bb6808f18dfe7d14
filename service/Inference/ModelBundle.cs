using Strayspot.Scoring.Standardization;
using Strayspot.Service.Calibration;
using Strayspot.Service.Models;
using Strayspot.Service.Profiles;

namespace Strayspot.Service.Inference;

/// <summary>
/// A model folder made ready to score: the ONNX session, its class statistics (a calibration bound to the model's
/// hash, else a plain statistics file) and its scoring profile.
/// </summary>
public sealed class ModelBundle : IDisposable
{
    private ModelBundle(string folder, SegmentationModel model, ClassStatistics? statistics, string? statisticsSource, ScoringProfile profile)
    {
        Folder = folder;
        Model = model;
        Statistics = statistics;
        StatisticsSource = statisticsSource;
        Profile = profile;
        var defaults = profile.Effective;
        // Without statistics SML cannot run: fall back to max logit and say so, rather than refuse to start.
        if (defaults.Method == Scoring.Pipeline.ScoreMethod.Sml && statistics is null)
        {
            defaults = defaults with { Method = Scoring.Pipeline.ScoreMethod.MaxLogit };
            Warning = "no calibration.json or statistics.json: scoring with max logit until the model is calibrated";
        }
        Scorer = new FrameScorer(model, statistics, defaults);
    }

    public string Folder { get; }
    public string Name => Path.GetFileName(Path.TrimEndingDirectorySeparator(Folder));
    public SegmentationModel Model { get; }
    public ClassStatistics? Statistics { get; }
    public string? StatisticsSource { get; }
    public ScoringProfile Profile { get; }
    public FrameScorer Scorer { get; }
    public string? Warning { get; }

    public IReadOnlyList<string> ClassNames => Model.Descriptor.Classes.Select(c => c.Name).ToList();

    public static ModelBundle Load(string folder, ModelRuntimeOptions? runtime = null)
    {
        var model = SegmentationModel.LoadFolder(folder, runtime);
        try
        {
            ClassStatistics? statistics = null;
            string? source = null;
            string calibration = Path.Combine(folder, CalibrationArtifact.FileName);
            string plain = Path.Combine(folder, "statistics.json");
            if (File.Exists(calibration))
            {
                var artifact = CalibrationArtifact.Load(calibration);
                artifact.EnsureMatches(model);
                statistics = artifact.ToStatistics();
                source = CalibrationArtifact.FileName;
            }
            else if (File.Exists(plain))
            {
                statistics = ClassStatistics.Load(plain);
                source = "statistics.json";
            }
            if (statistics is not null && statistics.Count != model.ClassCount)
                throw new ModelException(ModelErrorCodes.CalibrationInvalid,
                    $"{source} describes {statistics.Count} classes but the model has {model.ClassCount}.");
            return new ModelBundle(folder, model, statistics, source, ScoringProfile.LoadOrDefault(folder).WithSurfacesOf(model.Descriptor));
        }
        catch
        {
            model.Dispose();
            throw;
        }
    }

    public void Dispose() => Model.Dispose();
}
