namespace Strayspot.Service.Store;

/// <summary>
/// The schema versions both engines go through, in order. Each engine keeps a <c>schema_version</c> table and
/// applies, at open, each step above the version it holds (SQLite: one transaction per step; PostgreSQL: all in one
/// transaction under an advisory lock, so replicas starting together take turns); the step lists of the engines
/// must name these versions one for one (a test holds them to it).
/// </summary>
public static class StoreSchema
{
    public static readonly IReadOnlyList<(int Version, string Name)> Versions =
    [
        (1, "batches, frames, regions, decisions and their log"),
        (2, "region index filled from the frames' stored regions"),
        (3, "frame claims: lease owner and expiry, and who scored each frame"),
        (4, "callback claims: one replica delivers a batch's callback"),
        (5, "calibration and evaluation job records, run by one replica at a time"),
        (6, "track decisions: a verdict on a whole track of a recording, logged beside region decisions"),
        (7, "the artifacts a batch's frames get (null: every artifact, as before)"),
    ];

    public static int Latest => Versions[^1].Version;
}

/// <summary>One step of an engine's schema: its version and what it does to a transaction.</summary>
public sealed record SchemaStep<TTransaction>(int Version, Action<TTransaction> Apply);
