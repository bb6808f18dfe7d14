using Microsoft.Extensions.DependencyInjection;
using Microsoft.Extensions.Options;
using Strayspot.Service.Hosting;
using Strayspot.Tests.Service.Api;

namespace Strayspot.Tests.Service.Hosting;

[CollectionDefinition(nameof(ProcessEnvironment), DisableParallelization = true)]
public sealed class ProcessEnvironment;

public class ServiceOptionsTests
{
    private static string NewRoot() => Path.Combine(Path.GetTempPath(), "strayspot-http-" + Guid.NewGuid().ToString("N"));

    [Theory]
    [InlineData("Service:MaxConcurrentFrames", "0", "MaxConcurrentFrames must be 1..1024; got 0")]
    [InlineData("Service:MaxQueuedFrames", "-1", "MaxQueuedFrames must be 0..100000; got -1")]
    [InlineData("Service:RequestTimeout", "00:00:00", "RequestTimeout must be positive")]
    [InlineData("Service:MaxRequestBytes", "10", "MaxRequestBytes must be at least 1024; got 10")]
    [InlineData("Service:ArtifactRetention", "-00:01:00", "ArtifactRetention must be positive")]
    public async Task Bad_settings_stop_the_start_naming_setting_and_value(string key, string value, string message)
    {
        await using var app = TestService.BuildOnly(NewRoot(), new Dictionary<string, string?> { [key] = value });
        var e = await Assert.ThrowsAsync<OptionsValidationException>(() => app.StartAsync());
        Assert.Contains(message, e.Message);
    }

    [Fact]
    public async Task Missing_models_folder_stops_the_start()
    {
        string root = NewRoot();
        await using var app = TestService.BuildOnly(root, new Dictionary<string, string?> { ["Service:ModelsRoot"] = Path.Combine(root, "absent") });
        var e = await Assert.ThrowsAsync<OptionsValidationException>(() => app.StartAsync());
        Assert.Contains("absent", e.Message);
    }

    [Fact]
    public void Defaults_fill_artifacts_root_and_concurrency()
    {
        using var app = (IDisposable)TestService.BuildOnly(NewRoot());
        var o = ((Microsoft.AspNetCore.Builder.WebApplication)app).Services.GetRequiredService<IOptions<ServiceOptions>>().Value;
        // Unset, the CPU budget decides (1 frame in flight below 4 CPUs).
        Assert.Equal(CpuBudget.Current.FramesInFlight, o.MaxConcurrentFrames);
        Assert.Equal(Path.Combine(o.DataRoot, "artifacts"), o.ResolvedArtifactsRoot);
        Assert.True(Path.IsPathFullyQualified(o.ModelsRoot));
    }
}

[Collection(nameof(ProcessEnvironment))]
public class ServiceEnvironmentTests
{
    [Fact]
    public void Environment_variables_with_the_STRAYSPOT_prefix_override_settings()
    {
        const string name = "STRAYSPOT_Service__MaxQueuedFrames";
        Environment.SetEnvironmentVariable(name, "3");
        try
        {
            string root = Path.Combine(Path.GetTempPath(), "strayspot-http-" + Guid.NewGuid().ToString("N"));
            using var app = (IDisposable)TestService.BuildOnly(root);
            var o = ((Microsoft.AspNetCore.Builder.WebApplication)app).Services.GetRequiredService<IOptions<ServiceOptions>>().Value;
            Assert.Equal(3, o.MaxQueuedFrames);
        }
        finally
        {
            Environment.SetEnvironmentVariable(name, null);
        }
    }
}
