namespace Strayspot.Service.Hosting;

/// <summary>Whether the service can score frames now, and if not, why.</summary>
public sealed record ReadinessReport(bool Ready, IReadOnlyList<string> Models, IReadOnlyList<string> Problems);

/// <summary>Ready = the batch store answers, the catalog is loaded, lists at least one model, every listed model is usable and every ONNX model is warm.</summary>
public sealed class Readiness(ModelCatalog catalog, ModelSessions sessions, Batches.BatchService batches)
{
    public ReadinessReport Check()
    {
        var problems = new List<string>();
        if (!catalog.IsLoaded)
            problems.Add("The model catalog is still loading.");
        else if (catalog.Models.Count == 0)
            problems.Add("No model is installed: ModelsRoot has no folder with a descriptor.json.");
        foreach (var m in catalog.Models)
            if (!m.IsUsable)
                problems.Add($"Model '{m.Name}' is unusable: {m.Error}");
        if (catalog.IsLoaded) problems.AddRange(sessions.Problems());
        if (batches.Database.Problem is { } store) problems.Add(store);
        var usable = catalog.Models.Where(m => m.IsUsable).Select(m => m.Name).ToList();
        return new ReadinessReport(problems.Count == 0, usable, problems);
    }
}
