using System.Diagnostics;
using System.Security.Cryptography;
using Microsoft.ML.OnnxRuntime;
using SessionOptions = Microsoft.ML.OnnxRuntime.SessionOptions;
using Microsoft.ML.OnnxRuntime.Tensors;
using Strayspot.Service.Frames;

namespace Strayspot.Service.Models;

/// <summary>
/// A user's segmentation model on the CPU: one ONNX Runtime session for the process lifetime, shared by all threads
/// (the session's Run is thread-safe), and optionally a second one of the same weights on more threads for runs that
/// start alone (<see cref="ModelRuntimeOptions.LoneRunThreads"/>). Outputs are always read as channel-first, [1,C,h,w] or [C,h,w];
/// a channels-last output is refused with a hint.
/// </summary>
public sealed class SegmentationModel : IDisposable
{
    public const string ModelFileName = "model.onnx";

    private readonly InferenceSession _session;
    /// <summary>The same weights on more threads, for a run that starts while no other is in flight; null when not configured.</summary>
    private InferenceSession? _lone;
    private int _inFlight;
    private readonly string[] _inputNames;
    private readonly string[] _outputNames;
    // Never terminated, so sharing it across threads is safe; callers who cancel pass their own.
    private readonly RunOptions _defaultRunOptions = new();
    /// <summary>Null: no limit on inferences at once (<see cref="ModelRuntimeOptions.RunsAtOnce"/>).</summary>
    private SemaphoreSlim? _runs;
    // Live sessions per model file in this process: what the checks of "one session per model" count.
    private static readonly System.Collections.Concurrent.ConcurrentDictionary<string, int> LiveByPath = new(StringComparer.Ordinal);
    private int _disposed;

    private SegmentationModel(InferenceSession session, ModelDescriptor descriptor, string modelPath, string sha256, OnnxGraphFacts facts)
    {
        _session = session;
        Descriptor = descriptor;
        ModelPath = modelPath;
        ModelSha256 = sha256;
        Facts = facts;
        _inputNames = [descriptor.Input.Tensor];
        _outputNames = [descriptor.Output.Tensor];
        LiveByPath.AddOrUpdate(Path.GetFullPath(modelPath), 1, (_, n) => n + 1);
    }

    /// <summary>
    /// Models loaded from the file at <paramref name="modelPath"/> alive in this process now (each holds
    /// <see cref="OnnxSessions"/> ONNX Runtime sessions of it).
    /// </summary>
    public static int LiveSessions(string modelPath) => LiveByPath.GetValueOrDefault(Path.GetFullPath(modelPath));

    /// <summary>ONNX Runtime sessions this model holds: 1, or 2 with a lone-run session.</summary>
    public int OnnxSessions => _lone is null ? 1 : 2;
    public ModelDescriptor Descriptor { get; }
    public string ModelPath { get; }
    /// <summary>Lower-case hex SHA-256 of model.onnx: ties calibrations and results to the exact weights.</summary>
    public string ModelSha256 { get; }
    public OnnxGraphFacts Facts { get; }
    public int ClassCount => Descriptor.Classes.Count;
    /// <summary>The output is softmax probabilities: <see cref="Run(Memory{float}, long[], RunOptions?)"/> hands out their clamped logarithms.</summary>
    public bool OutputsProbabilities => Descriptor.Output.Kind == "probabilities";

    /// <summary>The model folder's name: how results, the API and messages name a model.</summary>
    public string FolderName => Path.GetFileName(Path.GetDirectoryName(Path.GetFullPath(ModelPath))) ?? Descriptor.Name;

    /// <summary>Refuses a scoring method the model's output cannot support, naming the ones it can.</summary>
    public void EnsureMethodFits(Strayspot.Scoring.Pipeline.ScoreMethod method) => ModelReadiness.EnsureMethodFits(Descriptor, FolderName, method);
    public TimeSpan LoadTime { get; private set; }

    /// <summary>Refuses a path that is not a model folder; given the model file itself, names the folder to pass.</summary>
    public static void EnsureFolder(string folder)
    {
        if (File.Exists(folder))
            throw new ModelException(ModelErrorCodes.ModelInvalid,
                $"'{folder}' is a file; pass the model folder that holds {ModelFileName} and {ModelDescriptor.FileName}: {Path.GetDirectoryName(Path.GetFullPath(folder))}");
        if (!Directory.Exists(folder))
            throw new ModelException(ModelErrorCodes.ModelInvalid, $"Model folder '{folder}' does not exist.");
    }

    /// <summary>Loads <c>model.onnx</c> with <c>descriptor.json</c> from a model folder.</summary>
    public static SegmentationModel LoadFolder(string folder, ModelRuntimeOptions? options = null)
    {
        EnsureFolder(folder);
        string descriptorPath = Path.Combine(folder, ModelDescriptor.FileName);
        if (!File.Exists(descriptorPath))
            throw new ModelException(ModelErrorCodes.DescriptorInvalid, $"Model folder '{folder}' has no {ModelDescriptor.FileName}.");
        return Load(Path.Combine(folder, ModelFileName), ModelDescriptor.Load(descriptorPath), options);
    }

    public static SegmentationModel Load(string modelPath, ModelDescriptor descriptor, ModelRuntimeOptions? options = null)
    {
        options ??= new ModelRuntimeOptions();
        if (options.IntraOpThreads < 1)
            throw new ArgumentOutOfRangeException(nameof(options), $"IntraOpThreads must be at least 1; got {options.IntraOpThreads}.");
        descriptor.EnsureValid();
        var clock = Stopwatch.StartNew();
        if (!File.Exists(modelPath))
            throw new ModelException(ModelErrorCodes.ModelInvalid, $"Model file '{modelPath}' does not exist.");
        byte[] bytes = File.ReadAllBytes(modelPath);
        string sha = Convert.ToHexStringLower(SHA256.HashData(bytes));
        var facts = OnnxGraphFacts.Parse(bytes, modelPath);
        facts.EnsureExternalDataInside(Path.GetDirectoryName(Path.GetFullPath(modelPath))!, modelPath);

        InferenceSession session = OpenSession(modelPath, options, options.IntraOpThreads);
        var model = new SegmentationModel(session, descriptor, modelPath, sha, facts);
        if (options.RunsAtOnce > 0) model._runs = new SemaphoreSlim(options.RunsAtOnce, options.RunsAtOnce);
        try
        {
            if (options.LoneRunThreads > options.IntraOpThreads) model._lone = OpenSession(modelPath, options, options.LoneRunThreads);
            model.CheckSignature();
            if (options.WarmUp) model.WarmUpRun();
        }
        catch
        {
            model.Dispose();
            throw;
        }
        model.LoadTime = clock.Elapsed;
        return model;
    }

    private static InferenceSession OpenSession(string modelPath, ModelRuntimeOptions options, int threads)
    {
        using var so = new SessionOptions
        {
            IntraOpNumThreads = threads,
            InterOpNumThreads = 1,
            GraphOptimizationLevel = options.OptimizationLevel,
            ExecutionMode = ExecutionMode.ORT_SEQUENTIAL,
            EnableMemoryPattern = options.MemoryPattern,
        };
        so.AddSessionConfigEntry("session.intra_op.allow_spinning", options.AllowSpinning ? "1" : "0");
        try
        {
            // From the path, so external data resolves against the model's own folder.
            return new InferenceSession(modelPath, so);
        }
        catch (OnnxRuntimeException e)
        {
            throw new ModelException(ModelErrorCodes.ModelInvalid, $"ONNX Runtime cannot load '{modelPath}': {e.Message}", e);
        }
    }

    private void CheckSignature()
    {
        var d = Descriptor;
        if (!_session.InputMetadata.TryGetValue(d.Input.Tensor, out var input))
            throw new ModelException(ModelErrorCodes.DescriptorInvalid,
                $"input.tensor: the model has no input '{d.Input.Tensor}'; its inputs are: {string.Join(", ", _session.InputMetadata.Keys)}.");
        if (_session.InputMetadata.Count != 1)
            throw new ModelException(ModelErrorCodes.ModelInvalid,
                $"The model takes {_session.InputMetadata.Count} inputs ({string.Join(", ", _session.InputMetadata.Keys)}); only single-image models are supported.");
        if (!input.IsTensor || input.ElementDataType != TensorElementType.Float)
            throw new ModelException(ModelErrorCodes.ModelInvalid,
                $"Input '{d.Input.Tensor}' must be a float32 tensor; it is {input.ElementDataType}.");
        var dims = input.Dimensions;
        if (dims.Length != 4)
            throw new ModelException(ModelErrorCodes.ModelInvalid,
                $"Input '{d.Input.Tensor}' must have rank 4 (one image); it has shape {ModelInspector.FormatShape(input)}.");
        bool nhwc = d.Input.Layout == "nhwc";
        int channelDim = nhwc ? dims[3] : dims[1];
        int otherChannelDim = nhwc ? dims[1] : dims[3];
        if ((channelDim > 0 && channelDim != 3) || (channelDim <= 0 && otherChannelDim == 3))
            throw new ModelException(ModelErrorCodes.DescriptorInvalid,
                $"input.layout: '{d.Input.Layout}' puts channels at axis {(nhwc ? 3 : 1)}, but the model's input {ModelInspector.FormatShape(input)} has {channelDim} there.");
        int h = nhwc ? dims[1] : dims[2], w = nhwc ? dims[2] : dims[3];
        if (h > 0 && w > 0 && (d.Input.Size.Mode != "fixed" || d.Input.Size.Height != h || d.Input.Size.Width != w))
            throw new ModelException(ModelErrorCodes.DescriptorInvalid,
                $"input.size: the model only accepts {h}×{w} (height×width); set mode 'fixed' with height {h} and width {w}.");
        if (!_session.OutputMetadata.TryGetValue(d.Output.Tensor, out var output))
            throw new ModelException(ModelErrorCodes.DescriptorInvalid,
                $"output.tensor: the model has no output '{d.Output.Tensor}'; its outputs are: {string.Join(", ", _session.OutputMetadata.Keys)}.");
        if (!output.IsTensor || output.ElementDataType != TensorElementType.Float)
            throw new ModelException(ModelErrorCodes.ModelOutputMismatch,
                $"Output '{d.Output.Tensor}' must be a float32 tensor; it is {output.ElementDataType}.");
        var od = output.Dimensions;
        if (od.Length is 3 or 4)
            CheckClassAxis(od.Select(x => (long)x).ToArray());
        else
            throw new ModelException(ModelErrorCodes.ModelOutputMismatch,
                $"Output '{d.Output.Tensor}' must be [1,C,h,w] or [C,h,w]; it has shape {ModelInspector.FormatShape(output)}.");
    }

    private void CheckClassAxis(long[] shape)
    {
        int offset = shape.Length - 3;
        long c = shape[offset];
        if (shape.Length == 4 && shape[0] > 1)
            throw new ModelException(ModelErrorCodes.ModelOutputMismatch,
                $"Output '{Descriptor.Output.Tensor}' has a batch of {shape[0]}; one frame per run is expected.");
        if (c > 0 && c != ClassCount)
        {
            string hint = shape[^1] == ClassCount ? " Its last axis matches the class count: export the output channels-first ([1,C,h,w])." : "";
            throw new ModelException(ModelErrorCodes.ModelOutputMismatch,
                $"The model outputs {c} classes (shape [{string.Join(", ", shape)}]) but the descriptor lists {ClassCount}.{hint}");
        }
    }

    private void WarmUpRun()
    {
        var size = Descriptor.Input.Size;
        int h, w;
        if (size.Mode == "fixed") (h, w) = (size.Height!.Value, size.Width!.Value);
        else
        {
            int side = size.SideLength ?? 64;
            int m = Math.Max(1, size.PadMultiple);
            h = w = (side + m - 1) / m * m;
        }
        long[] shape = Descriptor.Input.Layout == "nhwc" ? [1, h, w, 3] : [1, 3, h, w];
        var data = new float[3 * h * w];
        using (Run(data, shape)) { }
        // The first run took the lone-run session when there is one: the shared one needs its own warm-up.
        if (_lone is not null) using (Run(data, shape, null, _session)) { }
    }

    /// <summary>Runs one prepared frame. Thread-safe. Dispose the lease after reading its view.</summary>
    public LogitsLease Run(PreparedInput input, RunOptions? runOptions = null)
    {
        var lease = Run(input.Data, input.Shape, runOptions);
        try
        {
            EnsureOutputFitsInput(lease.View, input.Box);
            return lease;
        }
        catch
        {
            lease.Dispose();
            throw;
        }
    }

    /// <summary>
    /// An output whose height and width are the input's swapped (a transpose left in the export) would be stretched
    /// onto the frame without a word; refused. Only the swap is refused: an output resized inside the graph to a
    /// size of its own still maps onto the whole input.
    /// </summary>
    private void EnsureOutputFitsInput(Strayspot.Scoring.Logits.LogitsView output, ContentBox box)
    {
        int h = output.Height, w = output.Width, ih = box.InputHeight, iw = box.InputWidth;
        if (Strayspot.Scoring.Logits.LogitsAspect.Agrees(h, w, ih, iw) || !Strayspot.Scoring.Logits.LogitsAspect.Agrees(w, h, ih, iw)) return;
        throw new ModelException(ModelErrorCodes.ModelOutputMismatch,
            $"Output '{Descriptor.Output.Tensor}' is {w} wide × {h} high for an input {iw} wide × {ih} high: its height and width look swapped. " +
            "Export the output as [1,C,h,w] with h along the input's height.");
    }

    public LogitsLease Run(Memory<float> data, long[] shape, RunOptions? runOptions = null) => Run(data, shape, runOptions, null);

    private LogitsLease Run(Memory<float> data, long[] shape, RunOptions? runOptions, InferenceSession? only)
    {
        using var value = OrtValue.CreateTensorValueFromMemory(OrtMemoryInfo.DefaultInstance, data, shape);
        IDisposableReadOnlyCollection<OrtValue> outputs;
        _runs?.Wait();
        // A run that finds no other in flight takes the wider session; one that starts beside it takes the shared one.
        bool counted = _lone is not null;
        var session = only ?? (counted && Interlocked.Increment(ref _inFlight) == 1 ? _lone! : _session);
        try
        {
            outputs = session.Run(runOptions ?? _defaultRunOptions, _inputNames, [value], _outputNames);
        }
        catch (OnnxRuntimeException e)
        {
            throw new ModelException(ModelErrorCodes.ModelInvalid,
                $"The model failed on an input of shape [{string.Join(", ", shape)}]: {e.Message}", e);
        }
        finally
        {
            if (counted && only is null) Interlocked.Decrement(ref _inFlight);
            _runs?.Release();
        }
        try
        {
            var output = outputs[0];
            var info = output.GetTensorTypeAndShape();
            if (info.ElementDataType != TensorElementType.Float)
                throw new ModelException(ModelErrorCodes.ModelOutputMismatch, $"Output '{Descriptor.Output.Tensor}' is {info.ElementDataType}, not float32.");
            long[] outShape = info.Shape;
            if (outShape.Length is not (3 or 4))
                throw new ModelException(ModelErrorCodes.ModelOutputMismatch,
                    $"Output '{Descriptor.Output.Tensor}' must be [1,C,h,w] or [C,h,w]; it has shape [{string.Join(", ", outShape)}].");
            CheckClassAxis(outShape);
            var lease = new LogitsLease(outputs, output, outShape);
            if (OutputsProbabilities)
                lease.ConvertProbabilitiesToLogs();
            else
                EnsureNotProbabilities(lease.View);
            return lease;
        }
        catch
        {
            outputs.Dispose();
            throw;
        }
    }

    /// <summary>
    /// An output declared logits whose sampled pixels all hold values in [0, 1] summing to 1 is a softmax: max logit,
    /// energy and SML on it would score silently on the wrong scale. One class is left alone (its softmax is all 1).
    /// </summary>
    private void EnsureNotProbabilities(Strayspot.Scoring.Logits.LogitsView view)
    {
        int channels = view.Channels, plane = view.PlaneLength;
        if (channels < 2 || plane < 1) return;
        var data = view.Data.Span;
        int step = Math.Max(1, plane / Strayspot.Scoring.Reduction.LogProbabilities.CheckedPixels);
        for (int i = 0; i < plane; i += step)
        {
            double sum = 0;
            for (int c = 0; c < channels; c++)
            {
                float v = data[c * plane + i];
                if (!(v >= 0f && v <= 1f)) return;
                sum += v;
            }
            if (Math.Abs(sum - 1) > Strayspot.Scoring.Reduction.LogProbabilities.SumTolerance) return;
        }
        throw new ModelException(ModelErrorCodes.ModelOutputMismatch,
            $"output.kind is 'logits', but output '{Descriptor.Output.Tensor}' holds values between 0 and 1 whose classes sum to 1 at every pixel looked at: " +
            "these are probabilities (the graph ends in a softmax). Set output.kind to 'probabilities' in descriptor.json, or export the model without its final Softmax.");
    }

    public void Dispose()
    {
        if (Interlocked.Exchange(ref _disposed, 1) != 0) return;
        LiveByPath.AddOrUpdate(Path.GetFullPath(ModelPath), 0, (_, n) => n - 1);
        _session.Dispose();
        _lone?.Dispose();
        _defaultRunOptions.Dispose();
        _runs?.Dispose();
    }
}
