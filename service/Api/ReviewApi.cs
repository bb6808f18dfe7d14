using System.Text.Json.Serialization;
using Microsoft.AspNetCore.Http.HttpResults;
using Strayspot.Service.Review;

namespace Strayspot.Service.Api;

/// <summary>Body of a decision: the verdict, an optional note, and optionally who is deciding.</summary>
public sealed record DecisionRequest(
    [property: JsonPropertyName("verdict")] string? Verdict,
    [property: JsonPropertyName("note")] string? Note = null,
    [property: JsonPropertyName("reviewer")] string? Reviewer = null);

public sealed record DecisionList(
    [property: JsonPropertyName("batchId")] string BatchId,
    [property: JsonPropertyName("decisions")] IReadOnlyList<Decision> Decisions);

public sealed record DecisionLogPage(
    [property: JsonPropertyName("batchId")] string BatchId,
    [property: JsonPropertyName("entries")] IReadOnlyList<DecisionEntry> Entries);

/// <summary>Reviewing a batch: its ranked frames, each frame's images and regions, and decisions for the labeling queue.</summary>
public static class ReviewApi
{
    public const int MaxReviewerLength = 64;

    public static void AddServices(IServiceCollection services) => services.AddSingleton<BatchReview>();

    public static void MapReviewApi(this RouteGroupBuilder v1)
    {
        var group = v1.MapGroup("/batches/{id}").WithTags("Review");

        group.MapGet("/review", (string id, bool? frames, BatchReview review) => Answer(() => TypedResults.Ok(review.Overview(id, frames ?? true))))
            .WithName("GetBatchReview")
            .WithSummary("Overview for reviewing a batch: scored frames by frame score (highest first), decision counts, " +
                         "false-alarm rate by class beneath, the model, calibration and profile behind the scores, and class colours " +
                         "(?frames=false leaves out the frame list).")
            .Produces<ReviewOverview>().ProducesProblem(404);

        group.MapGet("/frames/{seq:int}", (string id, int seq, BatchReview review) => Answer(() => TypedResults.Ok(review.Frame(id, seq))))
            .WithName("GetBatchFrame")
            .WithSummary("One scored frame: its regions with outlines and decisions, the frame's own decision, and links to its images.")
            .Produces<ReviewFrame>().ProducesProblem(404).ProducesProblem(409);

        group.MapGet("/frames/{seq:int}/files/{name}", (string id, int seq, string name, BatchReview review) => Answer(() =>
            {
                var (path, type) = review.FrameFile(id, seq, name);
                return TypedResults.PhysicalFile(path, type);
            }))
            .WithName("GetBatchFrameFile")
            .WithSummary("A frame's source image or one of its artifacts: " + string.Join(", ", BatchReview.FrameFiles) + ".")
            .ProducesProblem(404).ProducesProblem(409);

        group.MapPut("/frames/{seq:int}/decision", (string id, int seq, DecisionRequest body, HttpContext http, BatchReview review) =>
                Decide(review, http, id, seq, null, body))
            .WithName("DecideFrame")
            .WithSummary("Records the decision on the whole frame (label-it, false-alarm or unsure, with an optional note); the last write wins.")
            .Produces<Decision>().ProducesProblem(400).ProducesProblem(404).ProducesProblem(409);

        group.MapDelete("/frames/{seq:int}/decision", (string id, int seq, HttpContext http, BatchReview review) =>
                Withdraw(review, http, id, seq, null))
            .WithName("WithdrawFrameDecision")
            .WithSummary("Withdraws the decision on the whole frame (kept in the decision log).")
            .Produces(204).ProducesProblem(404).ProducesProblem(409);

        group.MapPut("/frames/{seq:int}/regions/{region:int}/decision",
                (string id, int seq, int region, DecisionRequest body, HttpContext http, BatchReview review) =>
                    Decide(review, http, id, seq, region, body))
            .WithName("DecideRegion")
            .WithSummary("Records the decision on one region of a frame; the last write wins, every write is kept in the decision log.")
            .Produces<Decision>().ProducesProblem(400).ProducesProblem(404).ProducesProblem(409);

        group.MapDelete("/frames/{seq:int}/regions/{region:int}/decision", (string id, int seq, int region, HttpContext http, BatchReview review) =>
                Withdraw(review, http, id, seq, region))
            .WithName("WithdrawRegionDecision")
            .WithSummary("Withdraws the decision on one region (kept in the decision log).")
            .Produces(204).ProducesProblem(404).ProducesProblem(409);

        group.MapGet("/frames/{seq:int}/recording", (string id, int seq, BatchReview review) => Answer(() => TypedResults.Ok(review.Recording(id, seq))))
            .WithName("GetBatchRecording")
            .WithSummary("A recording (video) of the batch for its timeline: sampled frames' times and frame scores, the threshold, " +
                         "its kept tracks with their facts and decisions, and the ranked time segments.")
            .Produces<ReviewRecording>().ProducesProblem(404).ProducesProblem(409);

        group.MapGet("/frames/{seq:int}/tracks/{track:int}/best", (string id, int seq, int track, BatchReview review) =>
                Answer(() => TypedResults.PhysicalFile(review.TrackImage(id, seq, track), "image/png")))
            .WithName("GetBatchTrackBestFrame")
            .WithSummary("The best frame of a kept track (its highest region score) with the overlay, as PNG.")
            .ProducesProblem(404).ProducesProblem(409);

        group.MapPut("/frames/{seq:int}/tracks/{track:int}/decision",
                (string id, int seq, int track, DecisionRequest body, HttpContext http, BatchReview review) => Answer(() =>
                    TypedResults.Ok(review.DecideTrack(id, seq, track, body.Verdict, body.Note, Reviewer(http, body)))))
            .WithName("DecideTrack")
            .WithSummary("Records the decision on a whole kept track of a recording (label-it, false-alarm or unsure, with an optional note). " +
                         "It is logged once and lands on every region of the track in the manifest; where a region has its own decision, the later write wins.")
            .Produces<Decision>().ProducesProblem(400).ProducesProblem(404).ProducesProblem(409);

        group.MapDelete("/frames/{seq:int}/tracks/{track:int}/decision", (string id, int seq, int track, HttpContext http, BatchReview review) =>
                Answer(() => review.WithdrawTrack(id, seq, track, KeyName(http))
                    ? TypedResults.NoContent()
                    : ApiProblems.Create(ErrorCodes.NotFound, $"Track {track} of recording {seq} has no decision to withdraw.")))
            .WithName("WithdrawTrackDecision")
            .WithSummary("Withdraws the decision on a track (kept in the decision log).")
            .Produces(204).ProducesProblem(404).ProducesProblem(409);

        group.MapGet("/decisions", (string id, string? verdict, BatchReview review) =>
                Answer(() => TypedResults.Ok(new DecisionList(id, review.Decisions(id, verdict)))))
            .WithName("GetBatchDecisions")
            .WithSummary("The current decisions of a batch (?verdict=label-it for only those to send to labeling). " +
                         "A decision with region null is on the whole frame; a region decided through its track carries that track's number in 'track'.")
            .Produces<DecisionList>().ProducesProblem(400).ProducesProblem(404);

        group.MapGet("/decisions/log", (string id, long? after, int? limit, BatchReview review) =>
                Answer(() => TypedResults.Ok(new DecisionLogPage(id, review.Log(id, after ?? 0, limit ?? 1000)))))
            .WithName("GetBatchDecisionLog")
            .WithSummary("Every write to the batch's decisions in order (?after=revision&limit=N); a null verdict is a withdrawal.")
            .Produces<DecisionLogPage>().ProducesProblem(404);
    }

    private static IResult Decide(BatchReview review, HttpContext http, string id, int seq, int? region, DecisionRequest body) => Answer(() =>
        TypedResults.Ok(review.Decide(id, seq, region, body.Verdict, body.Note, Reviewer(http, body))));

    /// <summary>Who decides: the body's reviewer when given (checked), else the key's name.</summary>
    private static string? Reviewer(HttpContext http, DecisionRequest body)
    {
        string? reviewer = string.IsNullOrWhiteSpace(body.Reviewer) ? null : body.Reviewer.Trim();
        if (reviewer is not null && (reviewer.Length > MaxReviewerLength || reviewer.Any(char.IsControl)))
            throw new ReviewException(ErrorCodes.ValidationFailed, $"'reviewer' must be at most {MaxReviewerLength} printable characters.");
        return reviewer ?? KeyName(http);
    }

    private static IResult Withdraw(BatchReview review, HttpContext http, string id, int seq, int? region) => Answer(() =>
        review.Withdraw(id, seq, region, KeyName(http))
            ? TypedResults.NoContent()
            : ApiProblems.Create(ErrorCodes.NotFound, region is null
                ? $"Frame {seq} has no decision of its own to withdraw."
                : $"Region {region} of frame {seq} has no decision to withdraw."));

    private static string? KeyName(HttpContext http) => http.User.Identity?.IsAuthenticated == true ? http.User.Identity.Name : null;

    private static IResult Answer(Func<IResult> answer) => answer();
}
