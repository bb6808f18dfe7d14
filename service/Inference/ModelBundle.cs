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
    private ModelBundle(string folder, SegmentationModel model, ClassStatistics? statistics, string? statisticsSource,
        CalibrationArtifact? calibration, ScoringProfile profile)
    {
        Folder = folder;
        Model = model;
        Statistics = statistics;
        StatisticsSource = statisticsSource;
        Calibration = calibration;
        Profile = profile;
        Defaults = profile.Effective;
        // [setup] The profile's method may not run here (SML without statistics, or a method that needs logits on a
        // probabilities model): the bundle still loads so another method can be asked for; scoring with the
        // defaults is refused by ModelReadiness with the fix named. The scorer's own defaults are a runnable stand-in.
        var runnable = Defaults;
        if (statistics is null && runnable.Method == Scoring.Pipeline.ScoreMethod.Sml)
        {
            runnable = runnable with { Method = model.OutputsProbabilities ? Scoring.Pipeline.ScoreMethod.Msp : Scoring.Pipeline.ScoreMethod.MaxLogit };
            Warning = $"not calibrated: the sml method is refused until 'strayspot calibrate {folder} <frames-folder>' has run";
        }
        if (!Scoring.Pipeline.ScoreMethodInputs.WorksOnProbabilities(runnable.Method) && model.OutputsProbabilities)
            runnable = runnable with { Method = Scoring.Pipeline.ScoreMethod.Msp };
        Scorer = new FrameScorer(model, statistics, runnable);
    }

    public string Folder { get; }
    public string Name => Path.GetFileName(Path.TrimEndingDirectorySeparator(Folder));
    public SegmentationModel Model { get; }
    public ClassStatistics? Statistics { get; }
    public string? StatisticsSource { get; }
    public ScoringProfile Profile { get; }
    /// <summary>The calibration the statistics come from, checked against the weights and descriptor (null for statistics.json or none).</summary>
    public CalibrationArtifact? Calibration { get; }
    /// <summary>The profile's options: what scoring uses unless told otherwise (may be refused, see <see cref="EnsureCanScore"/>).</summary>
    public Scoring.Pipeline.ScoringOptions Defaults { get; }

    /// <summary>Refuses options this model cannot score with, naming the fix.</summary>
    public void EnsureCanScore(Scoring.Pipeline.ScoringOptions options) => ModelReadiness.EnsureCanScore(Model, Statistics, options, Folder);

    /// <summary>The report warnings for one frame of this size scored with <paramref name="options"/>.</summary>
    public List<Reports.ReportWarning> WarningsFor(int frameWidth, int frameHeight, Scoring.Pipeline.ScoringOptions options) =>
        Reports.ScoringWarnings.For(frameWidth, frameHeight, options, Model.ClassCount, Calibration, StatisticsSource);
    public FrameScorer Scorer { get; }
    public string? Warning { get; }

    public IReadOnlyList<string> ClassNames => Model.Descriptor.Classes.Select(c => c.Name).ToList();

    public static ModelBundle Load(string folder, ModelRuntimeOptions? runtime = null)
    {
        var model = SegmentationModel.LoadFolder(folder, runtime);
        try
        {
            ClassStatistics? statistics = null;
            CalibrationArtifact? artifact = null;
            string? source = null;
            string calibration = Path.Combine(folder, CalibrationArtifact.FileName);
            string plain = Path.Combine(folder, "statistics.json");
            if (File.Exists(calibration))
            {
                artifact = CalibrationArtifact.Load(calibration);
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
            return new ModelBundle(folder, model, statistics, source, artifact, ScoringProfile.LoadOrDefault(folder).WithSurfacesOf(model.Descriptor));
        }
        catch
        {
            model.Dispose();
            throw;
        }
    }

    public void Dispose() => Model.Dispose();
}
