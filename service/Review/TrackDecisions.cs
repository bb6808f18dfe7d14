using Strayspot.Service.Store;

namespace Strayspot.Service.Review;

/// <summary>
/// How a decision on a whole track reaches the regions it covers. A recording's manifest line carries its kept
/// tracks as its regions (region N is track N, see <c>BatchRecordings</c>), so a track decision lands on that region.
/// When a region has its own decision as well, the later write wins (the higher revision; both come from the one
/// counter of the batch's decision log): deciding a track after its regions sweeps over them, and deciding a region
/// after its track corrects that one sighting. Neither is deleted; withdrawing the later one shows the other again.
/// </summary>
public static class TrackDecisions
{
    /// <summary>The current frame and region decisions of a batch (or one frame), track decisions laid on their regions.</summary>
    public static List<Decision> Effective(this IDecisionStore store, string batchId, int? seq = null) =>
        Merge(store.Current(batchId, seq), store.CurrentTracks(batchId, seq));

    /// <summary>
    /// <paramref name="own"/> (frame and region decisions) with each of <paramref name="tracks"/> standing in for its
    /// region where it is the later write; a region decision taken from a track keeps <see cref="Decision.Track"/>.
    /// Ordered as the store orders decisions: by frame, the frame's own first, then by region.
    /// </summary>
    public static List<Decision> Merge(IReadOnlyList<Decision> own, IReadOnlyList<Decision> tracks)
    {
        if (tracks.Count == 0) return own as List<Decision> ?? own.ToList();
        var byTarget = new Dictionary<(int Seq, int? Region), Decision>();
        foreach (var d in own) byTarget[(d.Seq, d.Region)] = d;
        foreach (var t in tracks)
        {
            var target = (t.Seq, (int?)t.Track);
            if (byTarget.TryGetValue(target, out var region) && region.Revision > t.Revision) continue;
            byTarget[target] = t with { Region = t.Track };
        }
        return byTarget.Values.OrderBy(d => d.Seq).ThenBy(d => d.Region ?? 0).ToList();
    }
}
