using Strayspot.Scoring.Logits;
using Strayspot.Service.Models;

namespace Strayspot.Service.Api;

/// <summary>One row of the error table: the stable <c>code</c> member of a problem+json answer.</summary>
public sealed record ErrorCode(string Code, int Status, string Title);

/// <summary>
/// Every <c>code</c> the HTTP API can answer with, and its status: the one table that maps codes to statuses. The
/// domains define their own codes beside their exceptions (<see cref="Strayspot.Scoring.CodedException"/>); the
/// API-only ones are defined here. Codes are part of the API contract: clients switch on them,
/// so never rename one; add new ones instead.
/// </summary>
public static class ErrorCodes
{
    public const string BadRequest = "bad-request";
    public const string NotFound = "not-found";
    public const string MethodNotAllowed = "method-not-allowed";
    public const string ModelNotFound = "model-not-found";
    public const string ModelUnavailable = "model-unavailable";
    public const string ModelClassMismatch = "model-class-mismatch";
    public const string ArtifactNotFound = "artifact-not-found";
    public const string PayloadTooLarge = "payload-too-large";
    public const string UnsupportedMediaType = "unsupported-media-type";
    public const string ValidationFailed = "validation-failed";
    public const string QueueFull = "queue-full";
    public const string Timeout = "timeout";
    public const string Unauthorized = "unauthorized";
    public const string Forbidden = "forbidden";
    public const string NotReady = "not-ready";
    public const string InternalError = "internal-error";
    public const string PathOutsideData = Hosting.PathErrorCodes.OutsideData;
    public const string StatisticsMissing = "statistics-missing";
    public const string JobNotFound = Hosting.JobErrorCodes.NotFound;
    public const string JobNotFinished = Hosting.JobErrorCodes.NotFinished;
    public const string BatchNotFound = Batches.BatchErrorCodes.NotFound;
    public const string BatchConflict = Batches.BatchErrorCodes.Conflict;
    public const string BatchEmpty = Batches.BatchErrorCodes.Empty;
    public const string FolderNotFound = Hosting.PathErrorCodes.FolderNotFound;
    public const string ArchiveInvalid = Batches.BatchErrorCodes.ArchiveInvalid;
    public const string ArchiveEscape = Batches.BatchErrorCodes.ArchiveEscape;
    public const string ArchiveTooLarge = Batches.BatchErrorCodes.ArchiveTooLarge;
    public const string CallbackNotAllowed = Batches.BatchErrorCodes.CallbackNotAllowed;
    public const string FrameNotFound = Review.ReviewErrorCodes.FrameNotFound;
    public const string FrameNotScored = Review.ReviewErrorCodes.FrameNotScored;
    public const string RegionNotFound = Review.ReviewErrorCodes.RegionNotFound;
    public const string NoteTooLong = Review.ReviewErrorCodes.NoteTooLong;
    public const string TrackNotFound = Review.ReviewErrorCodes.TrackNotFound;
    public const string NotARecording = Review.ReviewErrorCodes.NotARecording;
    public const string FormInvalid = "form-invalid";

    private static readonly ErrorCode[] Rows =
    [
        new(BadRequest, 400, "The request is malformed"),
        new(ValidationFailed, 400, "A request value is invalid"),
        new(PathOutsideData, 400, "The path leaves the data folder"),
        new(BatchEmpty, 400, "The batch holds no frames"),
        new(ArchiveInvalid, 400, "The archive cannot be read"),
        new(ArchiveEscape, 400, "An archive entry would land outside its folder"),
        new(CallbackNotAllowed, 400, "The callback URL is not allowed"),
        new(NoteTooLong, 400, "The decision's note is too long"),
        new(FormInvalid, 400, "The multipart form is malformed or cut short"),
        new(Unauthorized, 401, "An API key is required"),
        new(Forbidden, 403, "The API key lacks a needed scope"),
        new(NotFound, 404, "No such resource"),
        new(ModelNotFound, 404, "No such model"),
        new(ArtifactNotFound, 404, "No such frame artifact"),
        new(JobNotFound, 404, "No such job"),
        new(BatchNotFound, 404, "No such batch"),
        new(FolderNotFound, 404, "No such folder in the data folder"),
        new(FrameNotFound, 404, "No such frame in the batch"),
        new(RegionNotFound, 404, "No such region in the frame"),
        new(TrackNotFound, 404, "No such kept track in the recording"),
        new(NotARecording, 409, "The frame is not a recording, so it has no tracks"),
        new(FrameNotScored, 409, "The frame has not been scored"),
        new(BatchConflict, 409, "The batch exists with other settings or is finished"),
        new(MethodNotAllowed, 405, "Method not allowed on this resource"),
        new(JobNotFinished, 409, "The job has not finished"),
        new(PayloadTooLarge, 413, "The request body is too large"),
        new(ArchiveTooLarge, 413, "The archive holds too many entries or bytes"),
        new(UnsupportedMediaType, 415, "Unsupported content type"),
        new(ModelClassMismatch, 422, "The input does not fit the model's classes"),
        new(StatisticsMissing, 422, "The model has no class statistics for this method"),
        new(QueueFull, 429, "Too many frames are waiting; retry later"),
        new(InternalError, 500, "Internal error"),
        new(ModelUnavailable, 503, "The model could not be loaded"),
        new(Timeout, 503, "The frame was not scored in time"),
        new(NotReady, 503, "The service is not ready"),
        // Codes raised by the scoring library (ScoringInputException.Code).
        new(ScoringErrorCodes.NpyFormat, 400, "The NPY file is malformed or of an unsupported dtype"),
        new(ScoringErrorCodes.LogitsShape, 400, "The logits have an unusable shape"),
        new(ScoringErrorCodes.LogitsNonFinite, 400, "The logits contain NaN or infinite values"),
        new(ScoringErrorCodes.FrameSize, 400, "The frame size is invalid"),
        new(ScoringErrorCodes.LogitsAspect, 400, "The logits' shape disagrees with the frame's"),
        new(ScoringErrorCodes.Options, 400, "The scoring options are invalid"),
        new(ScoringErrorCodes.StatisticsMismatch, 422, "The class statistics do not fit the logits"),
        new(ScoringErrorCodes.StatisticsFormat, 422, "The class statistics are invalid"),
        new(ScoringErrorCodes.ClassIndexRange, 422, "A class index is beyond the model's classes"),
        // Codes raised by the model runtime (ModelException.Code).
        new(ModelErrorCodes.DescriptorInvalid, 503, "The model's descriptor is invalid"),
        new(ModelErrorCodes.ModelInvalid, 503, "The model file cannot be used"),
        new(ModelErrorCodes.ModelOutputMismatch, 503, "The model's output does not match its descriptor"),
        new(ModelErrorCodes.ModelExternalData, 503, "The model's external data is refused"),
        // Codes raised on frames (FrameException.Code): the image, not the model.
        new(Frames.FrameErrorCodes.Format, 415, "The frame's image format is not supported"),
        new(Frames.FrameErrorCodes.TooLarge, 413, "The frame has too many pixels"),
        new(Frames.FrameErrorCodes.Corrupt, 400, "The frame's image data is corrupt"),
        new(Frames.FrameErrorCodes.Missing, 400, "No frame where one was expected"),
        new(ModelErrorCodes.CalibrationModelMismatch, 422, "The calibration was made with another model"),
        new(ModelErrorCodes.CalibrationInvalid, 422, "The calibration is invalid"),
        new(ModelErrorCodes.MethodNeedsLogits, 422, "The method needs logits, but the model outputs probabilities"),
        // Codes raised reading recordings (ModelException.Code; in batches they go into the failed line's error).
        new(Recordings.RecordingErrorCodes.RecordingFormat, 415, "The file is not a recording this service reads"),
        new(Recordings.RecordingErrorCodes.RecordingCorrupt, 400, "The recording's data is corrupt"),
        new(Recordings.RecordingErrorCodes.RecordingTimeout, 504, "Decoding the recording ran past its time limit"),
        new(Recordings.RecordingErrorCodes.DecoderMissing, 503, "The video decoder (ffmpeg) is not installed"),
        // Codes raised by evaluation (datasets and metrics).
        new(Evaluation.DatasetErrorCodes.Missing, 404, "No such dataset folder"),
        new(Evaluation.DatasetErrorCodes.Empty, 400, "The dataset holds no frame with a mask"),
        new(Evaluation.DatasetErrorCodes.Invalid, 400, "The dataset's files are missing, unreadable or do not fit together"),
        new(Strayspot.Scoring.Evaluation.EvaluationErrorCodes.Argument, 400, "An evaluation setting is invalid"),
        new(Strayspot.Scoring.Evaluation.EvaluationErrorCodes.LabelValue, 400, "A mask holds a value other than 0, 1 or 255"),
        new(Strayspot.Scoring.Evaluation.EvaluationErrorCodes.OneClass, 422, "The dataset has anomaly pixels of only one kind"),
        new(Strayspot.Scoring.Evaluation.EvaluationErrorCodes.ScoreNaN, 422, "A score to evaluate is not a number"),
        new(Strayspot.Scoring.Evaluation.EvaluationErrorCodes.LengthMismatch, 422, "Scores and labels of different sizes"),
        new(Strayspot.Scoring.Evaluation.EvaluationErrorCodes.MergeMismatch, 422, "Partial evaluations that do not fit together"),
    ];

    private static readonly Dictionary<string, ErrorCode> ByCode = Rows.ToDictionary(r => r.Code, StringComparer.Ordinal);

    public static IReadOnlyList<ErrorCode> All => Rows;

    public static bool TryGet(string code, out ErrorCode row) => ByCode.TryGetValue(code, out row!);

    /// <summary>The row for a code; an unknown code is a programming error, answered as a 500.</summary>
    public static ErrorCode Get(string code) =>
        ByCode.TryGetValue(code, out var row) ? row : new ErrorCode(code, 500, "Error");

    /// <summary>The code for a bare status (404 from routing, 413 from the server, ...).</summary>
    public static string ForStatus(int status) => status switch
    {
        400 => BadRequest,
        401 => Unauthorized,
        403 => Forbidden,
        404 => NotFound,
        405 => MethodNotAllowed,
        413 => PayloadTooLarge,
        415 => UnsupportedMediaType,
        429 => QueueFull,
        503 => NotReady,
        >= 500 => InternalError,
        _ => BadRequest,
    };

    /// <summary>A stable URI reference naming the problem type (RFC 9457 §3.1.1); not meant to be dereferenced.</summary>
    public static string TypeUri(string code) => "urn:strayspot:problem:" + code;
}
