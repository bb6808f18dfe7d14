using System.Diagnostics;
using System.Text.Json;
using System.Text.RegularExpressions;

namespace Strayspot.Tests.Deploy;

/// <summary>
/// The kustomize overlays under deploy/kubernetes, rendered offline by <c>kubectl kustomize</c> and checked object by
/// object against the Kubernetes API's JSON schemas shipped by the npm package kubernetes-models (5.1.0), refusing
/// fields the schemas do not know. No cluster is needed or used.
/// </summary>
public sealed class KubernetesManifestTests
{
    private static string Repo => Path.GetFullPath(Path.Combine(AppContext.BaseDirectory, "..", "..", "..", ".."));
    private static string Script => Path.Combine(Repo, "tests", "Deploy", "validate-manifests.mjs");

    [ManifestFact]
    public void Edge_overlay_is_one_sqlite_replica_that_never_overlaps_itself()
    {
        var objects = RenderAndValidate("edge");
        var deployment = One(objects, "Deployment");
        Assert.Equal(1, deployment.GetProperty("spec").GetProperty("replicas").GetInt32());
        Assert.Equal("Recreate", deployment.GetProperty("spec").GetProperty("strategy").GetProperty("type").GetString());
        Assert.Equal("sqlite", Env(deployment)["STRAYSPOT_Service__Store"].GetProperty("value").GetString());
        Assert.All(objects.Where(o => Kind(o) == "PersistentVolume"), pv => Assert.True(pv.GetProperty("spec").TryGetProperty("local", out _)));
        Assert.DoesNotContain(objects, o => Kind(o) is "Job" or "HorizontalPodAutoscaler");
        AssertHardened(deployment);
    }

    [ManifestFact]
    public void Cluster_overlay_runs_replicas_on_postgres_with_autoscaler_budget_and_a_backfill_job()
    {
        var objects = RenderAndValidate("cluster");
        var deployment = One(objects, "Deployment");
        Assert.Equal(3, deployment.GetProperty("spec").GetProperty("replicas").GetInt32());
        var env = Env(deployment);
        Assert.Equal("postgres", env["STRAYSPOT_Service__Store"].GetProperty("value").GetString());
        Assert.Equal("strayspot-store", env["STRAYSPOT_Service__StoreConnection"].GetProperty("valueFrom").GetProperty("secretKeyRef").GetProperty("name").GetString());
        var hpa = One(objects, "HorizontalPodAutoscaler").GetProperty("spec");
        Assert.Equal("strayspot", hpa.GetProperty("scaleTargetRef").GetProperty("name").GetString());
        Assert.True(hpa.GetProperty("maxReplicas").GetInt32() > hpa.GetProperty("minReplicas").GetInt32());
        Assert.Equal("service", One(objects, "PodDisruptionBudget").GetProperty("spec").GetProperty("selector").GetProperty("matchLabels")
            .GetProperty("app.kubernetes.io/component").GetString());
        var job = One(objects, "Job");
        Assert.True(job.GetProperty("spec").GetProperty("parallelism").GetInt32() > 1);
        var worker = job.GetProperty("spec").GetProperty("template").GetProperty("spec").GetProperty("containers")[0];
        Assert.Equal(["work", "--until-idle"], worker.GetProperty("args").EnumerateArray().Take(2).Select(a => a.GetString()));
        Assert.All(objects.Where(o => Kind(o) == "PersistentVolumeClaim" && o.GetProperty("metadata").GetProperty("name").GetString() == "strayspot-data"),
            c => Assert.Equal("ReadWriteMany", c.GetProperty("spec").GetProperty("accessModes")[0].GetString()));
        AssertHardened(deployment);
        AssertHardened(job);
        // CPU asked for = threads the settings give ONNX Runtime, per pod.
        foreach (var (workload, threads) in new[] { (deployment, 2), (job, 1) })
        {
            var c = workload.GetProperty("spec").GetProperty("template").GetProperty("spec").GetProperty("containers")[0];
            Assert.Equal(threads.ToString(), Env(workload)["STRAYSPOT_Service__IntraOpThreads"].GetProperty("value").GetString());
            Assert.Equal(threads.ToString(), c.GetProperty("resources").GetProperty("requests").GetProperty("cpu").GetString());
        }
    }

    [ManifestFact]
    public void The_check_refuses_an_unknown_field_and_a_wrong_type()
    {
        string rendered = Run("kubectl", ["kustomize", Path.Combine(Repo, "deploy", "kubernetes", "overlays", "cluster")], null).Stdout;
        string broken = new Regex("readOnlyRootFilesystem: true").Replace(rendered, "readOnlyRootFilesystem: true\n          readOnlyRootFilesytem: true", 1);
        broken = broken.Replace("parallelism: 4", "parallelism: four");
        var (code, _, stderr) = Run("node", [Script, ManifestFactAttribute.Modules], broken);
        Assert.Equal(1, code);
        Assert.Contains("readOnlyRootFilesytem is not a field the schema knows", stderr);
        Assert.Contains("/spec/parallelism type", stderr);
    }

    private static List<JsonElement> RenderAndValidate(string overlay)
    {
        var (code, rendered, err) = Run("kubectl", ["kustomize", Path.Combine(Repo, "deploy", "kubernetes", "overlays", overlay)], null);
        Assert.True(code == 0, $"kubectl kustomize failed: {err}");
        string json = Path.GetTempFileName();
        try
        {
            var (vcode, stdout, stderr) = Run("node", [Script, ManifestFactAttribute.Modules, json], rendered);
            Assert.True(vcode == 0, $"the {overlay} overlay does not validate:\n{stderr}\n{stdout}");
            return JsonDocument.Parse(File.ReadAllText(json)).RootElement.EnumerateArray().ToList();
        }
        finally
        {
            File.Delete(json);
        }
    }

    private static string Kind(JsonElement o) => o.GetProperty("kind").GetString()!;

    private static JsonElement One(List<JsonElement> objects, string kind) => Assert.Single(objects, o => Kind(o) == kind);

    private static Dictionary<string, JsonElement> Env(JsonElement workload) =>
        workload.GetProperty("spec").GetProperty("template").GetProperty("spec").GetProperty("containers")[0].GetProperty("env")
            .EnumerateArray().ToDictionary(e => e.GetProperty("name").GetString()!);

    private static void AssertHardened(JsonElement workload)
    {
        var pod = workload.GetProperty("spec").GetProperty("template").GetProperty("spec");
        Assert.True(pod.GetProperty("securityContext").GetProperty("runAsNonRoot").GetBoolean());
        foreach (var c in pod.GetProperty("containers").EnumerateArray())
        {
            var sc = c.GetProperty("securityContext");
            Assert.True(sc.GetProperty("readOnlyRootFilesystem").GetBoolean());
            Assert.False(sc.GetProperty("allowPrivilegeEscalation").GetBoolean());
            Assert.True(c.GetProperty("resources").GetProperty("requests").TryGetProperty("memory", out _));
            if (Kind(workload) == "Deployment")
            {
                Assert.Equal("/readyz", c.GetProperty("readinessProbe").GetProperty("httpGet").GetProperty("path").GetString());
                Assert.Equal("/healthz", c.GetProperty("livenessProbe").GetProperty("httpGet").GetProperty("path").GetString());
            }
        }
    }

    private static (int Code, string Stdout, string Stderr) Run(string exe, string[] args, string? stdin)
    {
        var info = new ProcessStartInfo(exe) { RedirectStandardOutput = true, RedirectStandardError = true, RedirectStandardInput = true, UseShellExecute = false };
        foreach (string a in args) info.ArgumentList.Add(a);
        using var p = Process.Start(info)!;
        var err = p.StandardError.ReadToEndAsync();
        var output = p.StandardOutput.ReadToEndAsync();
        if (stdin is not null) p.StandardInput.Write(stdin);
        p.StandardInput.Close();
        p.WaitForExit();
        return (p.ExitCode, output.Result, err.Result);
    }
}

/// <summary>Skipped, with the reason, where kubectl, node or the installed kubernetes-models package is missing.</summary>
public sealed class ManifestFactAttribute : FactAttribute
{
    public static string Modules => Path.Combine(
        Environment.GetEnvironmentVariable("STRAYSPOT_KUBERNETES_MODELS") is { Length: > 0 } d
            ? d
            : Path.Combine(Environment.GetFolderPath(Environment.SpecialFolder.UserProfile), ".cache", "strayspot", "kubernetes-models"),
        "node_modules");

    public ManifestFactAttribute()
    {
        if (!OnPath("kubectl")) Skip = "kubectl is not installed: the manifests cannot be rendered (kubectl kustomize)";
        else if (!OnPath("node")) Skip = "node is not installed: the schema check runs kubernetes-models under Node.js";
        else if (!Directory.Exists(Path.Combine(Modules, "kubernetes-models")) || !Directory.Exists(Path.Combine(Modules, "yaml")))
            Skip = $"kubernetes-models is not installed in {Modules}: run .ci/run, or npm install kubernetes-models@5.1.0 yaml@2.9.1 " +
                   "there (or in the folder STRAYSPOT_KUBERNETES_MODELS names)";
    }

    private static bool OnPath(string exe) =>
        (Environment.GetEnvironmentVariable("PATH") ?? "").Split(':').Any(d => File.Exists(Path.Combine(d, exe)));
}
