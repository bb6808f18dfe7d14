using OpenTelemetry.Metrics;
using System.Diagnostics;
using Microsoft.AspNetCore.Authentication;
using Microsoft.AspNetCore.Authorization;
using Microsoft.AspNetCore.Http.Features;
using Microsoft.AspNetCore.Server.Kestrel.Core;
using Microsoft.Extensions.Options;
using Serilog;
using Serilog.Events;
using Serilog.Formatting.Compact;
using Strayspot.Service.Api;

namespace Strayspot.Service.Hosting;

/// <summary>Builds the HTTP service: configuration, logging, limits, errors, authentication and the API routes.</summary>
public static class ServiceHost
{
    public const string EnvironmentPrefix = "STRAYSPOT_";

    public static WebApplication Build(ServiceHostSettings settings, Action<WebApplicationBuilder>? configure = null)
    {
        var builder = WebApplication.CreateBuilder(new WebApplicationOptions
        {
            // Many hosts share one test process: no file watchers on appsettings.json.
            Args = ["--hostBuilder:reloadConfigOnChange=false"],
            ContentRootPath = AppContext.BaseDirectory,
            EnvironmentName = settings.EnvironmentName,
        });
        ConfigureConfiguration(builder, settings);
        ConfigureServices(builder, settings);
        configure?.Invoke(builder);

        var app = builder.Build();
        ConfigurePipeline(app);
        return app;
    }

    private static void ConfigureConfiguration(WebApplicationBuilder builder, ServiceHostSettings settings)
    {
        builder.Configuration.AddEnvironmentVariables(EnvironmentPrefix);
        var overrides = new Dictionary<string, string?>();
        if (settings.ModelsRoot is not null) overrides[$"{ServiceOptions.Section}:{nameof(ServiceOptions.ModelsRoot)}"] = settings.ModelsRoot;
        if (settings.DataRoot is not null) overrides[$"{ServiceOptions.Section}:{nameof(ServiceOptions.DataRoot)}"] = settings.DataRoot;
        foreach (var (k, v) in settings.Configuration ?? new Dictionary<string, string?>()) overrides[k] = v;
        builder.Configuration.AddInMemoryCollection(overrides);

        // Every source of a listen address counts for the loopback rule: the serve verb's --urls (each token may hold
        // several addresses separated by ';'), configuration key "urls" (ASPNETCORE_URLS, STRAYSPOT_urls, appsettings)
        // and endpoints declared under Kestrel:Endpoints (which Kestrel binds in addition, from any source).
        var urls = settings.Urls is { Count: > 0 } given
            ? ListenAddresses.Split(given)
            : ListenAddresses.Split([builder.Configuration["urls"] ?? ""]) is { Count: > 0 } configured ? configured : [ServiceHostSettings.DefaultUrl];
        string urlSource = settings.Urls is { Count: > 0 } ? "--urls" : builder.Configuration["urls"] is { Length: > 0 } ? "urls (ASPNETCORE_URLS or STRAYSPOT_urls)" : "the default";
        var declared = urls.Select(u => new ListenAddress(u, urlSource)).ToList();
        foreach (var e in builder.Configuration.GetSection("Kestrel:Endpoints").GetChildren())
            declared.Add(new ListenAddress(e["Url"] ?? "(no Url)", $"Kestrel:Endpoints:{e.Key}:Url"));
        builder.WebHost.UseUrls(urls.ToArray());
        builder.Services.AddSingleton(new ListenAddresses(declared));
    }

    /// <summary>
    /// Starts the server, then checks the addresses Kestrel actually bound (the last word on what listens): a wide one
    /// without API keys stops the server again and throws, like a refused configuration.
    /// </summary>
    public static async Task StartCheckedAsync(WebApplication app, CancellationToken ct = default)
    {
        await app.StartAsync(ct);
        var bound = app.Services.GetRequiredService<Microsoft.AspNetCore.Hosting.Server.IServer>()
            .Features.Get<Microsoft.AspNetCore.Hosting.Server.Features.IServerAddressesFeature>()?.Addresses.ToList() ?? [];
        var keys = app.Services.GetRequiredService<IOptions<ServiceOptions>>().Value.ApiKeys.Count;
        if (ListenAddresses.Refusal(bound.Select(a => new ListenAddress(a, "the address Kestrel bound")).ToList(), keys) is { } refusal)
        {
            await app.StopAsync(CancellationToken.None);
            throw new OptionsValidationException(ServiceOptions.Section, typeof(ServiceOptions), [refusal]);
        }
    }

    private static void ConfigureServices(WebApplicationBuilder builder, ServiceHostSettings settings)
    {
        var services = builder.Services;
        services.AddOptions<ServiceOptions>()
            .Bind(builder.Configuration.GetSection(ServiceOptions.Section))
            .PostConfigure(o =>
            {
                o.ModelsRoot = Path.GetFullPath(o.ModelsRoot);
                o.DataRoot = Path.GetFullPath(o.DataRoot);
                o.ArtifactsRoot = o.ArtifactsRoot is null ? null : Path.GetFullPath(o.ArtifactsRoot);
            })
            .ValidateOnStart();
        services.AddSingleton<IValidateOptions<ServiceOptions>, ServiceOptionsValidator>();

        services.Configure<HostOptions>(o => o.ShutdownTimeout = TimeSpan.FromSeconds(8)); // inside docker stop's 10 s
        services.AddOptions<KestrelServerOptions>().Configure<IOptions<ServiceOptions>>((k, s) =>
        {
            k.AddServerHeader = false;
            k.Limits.MaxRequestBodySize = s.Value.MaxRequestBytes;
        });
        services.AddOptions<FormOptions>().Configure<IOptions<ServiceOptions>>((f, s) =>
        {
            f.MultipartBodyLengthLimit = s.Value.MaxRequestBytes;
            f.ValueCountLimit = 64;
        });

        ConfigureLogging(builder, settings);

        services.AddProblemDetails(o => o.CustomizeProblemDetails = AddCodeAndTrace);
        services.AddExceptionHandler<ApiExceptionHandler>();

        services.AddAuthentication(ApiKeyAuthenticationHandler.SchemeName)
            .AddScheme<AuthenticationSchemeOptions, ApiKeyAuthenticationHandler>(ApiKeyAuthenticationHandler.SchemeName, null);
        services.AddSingleton<IAuthorizationHandler, ScopeHandler>();
        services.AddAuthorization();
        services.AddOptions<AuthorizationOptions>().Configure<IOptions<ServiceOptions>>((a, s) =>
        {
            if (s.Value.ApiKeys.Count > 0)
                a.FallbackPolicy = new AuthorizationPolicyBuilder(ApiKeyAuthenticationHandler.SchemeName).RequireAuthenticatedUser().Build();
            a.AddPolicy(ApiPolicies.Admin, p => p
                .AddAuthenticationSchemes(ApiKeyAuthenticationHandler.SchemeName)
                .AddRequirements(new ScopeRequirement(ApiPolicies.Admin)));
        });

        services.AddSingleton(TimeProvider.System);
        services.AddSingleton<ModelCatalog>();
        services.AddHostedService<ModelCatalogLoader>();
        // One parallel policy and one model registry per process: every session and pipeline is built from them.
        // IntraOpThreads 0: the container's CPU quota decides, not the host's core count.
        services.AddSingleton(sp =>
        {
            var o = sp.GetRequiredService<IOptions<ServiceOptions>>().Value;
            return Inference.ParallelSettings.FromThreads(o.IntraOpThreads > 0 ? o.IntraOpThreads : CpuBudget.Current.IntraOpThreads)
                with { MemoryPattern = o.OnnxMemoryPattern, NetworkRunsAtOnce = o.NetworkRunsAtOnce, LoneRunThreads = o.LoneRunThreads };
        });
        services.AddSingleton(sp => new Inference.ModelRegistry(sp.GetRequiredService<Inference.ParallelSettings>()));
        services.AddSingleton<ModelSessions>();
        services.AddHostedService<ModelSessionLoader>();
        services.AddHostedService<ModelFolderWatch>();
        services.AddSingleton<Readiness>();
        services.AddSingleton<FrameGate>();
        services.AddSingleton<ScoringLane>();
        services.AddSingleton<DriftWatch>();
        services.AddSingleton<ServiceMetrics>();
        services.AddSingleton<Inference.IFrameObserver, ServiceFrameObserver>();
        services.AddSingleton(sp => new Inference.FrameRunner(sp.GetRequiredService<Inference.IFrameObserver>()));
        services.AddOpenTelemetry().WithMetrics(m => m
            .AddMeter(ServiceMetrics.MeterName, "Microsoft.AspNetCore.Hosting", "Microsoft.AspNetCore.Server.Kestrel", "System.Runtime")
            .AddPrometheusExporter());
        services.AddSingleton<Calibration.CalibrationJobs>();
        services.AddHostedService(sp => sp.GetRequiredService<Calibration.CalibrationJobs>());
        services.AddSingleton<Evaluation.EvaluationJobs>();
        services.AddHostedService(sp => sp.GetRequiredService<Evaluation.EvaluationJobs>());
        // One decoder for the process: its memory pool is reused across requests instead of one pool per request.
        services.AddSingleton(sp => new Strayspot.Service.Frames.FrameDecoder(new Strayspot.Service.Frames.FrameDecoderOptions
        {
            MaxPixels = sp.GetRequiredService<IOptions<ServiceOptions>>().Value.MaxPixels,
        }));
        // Scores can be ±Infinity (e.g. SML of a class with zero spread); write them rather than fail the answer.
        services.ConfigureHttpJsonOptions(o => o.SerializerOptions.NumberHandling =
            System.Text.Json.Serialization.JsonNumberHandling.AllowNamedFloatingPointLiterals);
        services.AddSingleton<ArtifactStore>();
        services.AddHostedService<ArtifactSweeper>();
        BatchesApi.AddServices(services, builder.Configuration);
        ReviewApi.AddServices(services);

        services.AddServiceOpenApi();
    }

    private static void ConfigureLogging(WebApplicationBuilder builder, ServiceHostSettings settings)
    {
        builder.Logging.ClearProviders();
        // One logger per host, not the static bootstrap logger: several hosts run side by side in tests.
        builder.Services.AddSerilog((services, cfg) =>
        {
            cfg.MinimumLevel.Information()
                .MinimumLevel.Override("Microsoft.AspNetCore", LogEventLevel.Warning)
                .MinimumLevel.Override("Microsoft.Hosting.Lifetime", LogEventLevel.Information)
                .ReadFrom.Configuration(builder.Configuration)
                .Enrich.FromLogContext();
            if (settings.ConsoleLog)
                cfg.WriteTo.Console(new CompactJsonFormatter());
            settings.ConfigureLogging?.Invoke(cfg);
        }, preserveStaticLogger: true);
    }

    /// <summary>Every problem gets a stable code (from its status when the producer set none) and the trace id.</summary>
    private static void AddCodeAndTrace(ProblemDetailsContext ctx)
    {
        var p = ctx.ProblemDetails;
        int status = p.Status ?? ctx.HttpContext.Response.StatusCode;
        p.Status = status;
        if (!p.Extensions.TryGetValue("code", out var code) || code is null)
        {
            string c = ErrorCodes.ForStatus(status);
            p.Extensions["code"] = c;
            var row = ErrorCodes.Get(c);
            p.Title = row.Title;
            p.Type = ErrorCodes.TypeUri(c);
            p.Detail ??= DefaultDetail(ctx.HttpContext, status);
        }
        p.Extensions["traceId"] = Activity.Current?.Id ?? ctx.HttpContext.TraceIdentifier;
        p.Instance ??= ctx.HttpContext.Request.Path;
    }

    private static string? DefaultDetail(HttpContext http, int status) => status switch
    {
        404 => $"Nothing is served at {http.Request.Path}.",
        405 => $"{http.Request.Method} is not allowed on {http.Request.Path}.",
        413 => "The request body is larger than the service accepts (Service:MaxRequestBytes).",
        415 => $"Content type '{http.Request.ContentType}' is not accepted here; the API docs at /docs name the expected one.",
        _ => null,
    };

    private static void ConfigurePipeline(WebApplication app)
    {
        app.UseSerilogRequestLogging(o =>
        {
            // The host's own logger: the static one is left alone (several hosts share a test process).
            o.Logger = app.Services.GetRequiredService<Serilog.ILogger>();
            o.MessageTemplate = "HTTP {RequestMethod} {Route} responded {StatusCode} in {Elapsed:0.0} ms";
            o.EnrichDiagnosticContext = (diag, http) =>
            {
                diag.Set("RequestId", http.TraceIdentifier);
                string? route = (http.GetEndpoint() as RouteEndpoint)?.RoutePattern.RawText;
                diag.Set("Route", route is null ? "(no route)" : route.Length > 1 ? route.TrimEnd('/') : route);
                if (http.User.Identity?.IsAuthenticated == true) diag.Set("Client", http.User.Identity.Name);
            };
        });
        app.UseExceptionHandler(new ExceptionHandlerOptions { SuppressDiagnosticsCallback = _ => false });
        app.UseStatusCodePages();
        app.UseMiddleware<RequestSizeGuard>();
        app.UseRouting();
        app.UseServiceOpenApi();
        app.UseAuthentication();
        app.UseAuthorization();

        app.MapHealthApi();
        // Scraped like the health endpoints: no key, so keep the port on a trusted network.
        app.MapPrometheusScrapingEndpoint("/metrics").AllowAnonymous();
        // A worker replica takes batch work only: no scoring traffic reaches it.
        // Read from configuration, not the options: their validation belongs to the start, where it names the setting.
        if (app.Configuration.GetValue<bool>($"{Batches.BatchOptions.Section}:{nameof(Batches.BatchOptions.WorkerOnly)}")) return;
        Review.ReviewPage.Map(app);
        var v1 = app.MapGroup("/v1");
        // One area a file, each an extension on the /v1 group.
        v1.MapModelsApi();
        v1.MapArtifactsApi();
        v1.MapCalibrationsApi();
        v1.MapEvaluationsApi();
        v1.MapLogitsApi();
        v1.MapImageFramesApi();
        v1.MapBatchesApi();
        v1.MapReviewApi();
    }
}

/// <summary>Refuses a body whose declared length is over the limit before anything reads it, on any server.</summary>
public sealed class RequestSizeGuard(RequestDelegate next, IOptions<ServiceOptions> options, IProblemDetailsService problems)
{
    public async Task InvokeAsync(HttpContext http)
    {
        long max = options.Value.MaxRequestBytes;
        if (http.Request.ContentLength is long length && length > max)
        {
            http.Response.StatusCode = StatusCodes.Status413PayloadTooLarge;
            await problems.WriteAsync(new ProblemDetailsContext
            {
                HttpContext = http,
                ProblemDetails =
                {
                    Status = 413, Title = ErrorCodes.Get(ErrorCodes.PayloadTooLarge).Title,
                    Type = ErrorCodes.TypeUri(ErrorCodes.PayloadTooLarge),
                    Detail = $"The request body has {length} bytes; the service accepts at most {max} (Service:MaxRequestBytes).",
                    Extensions = { ["code"] = ErrorCodes.PayloadTooLarge },
                },
            });
            return;
        }
        await next(http);
    }
}
