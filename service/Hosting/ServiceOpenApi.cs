using System.Text.Json.Nodes;
using Microsoft.OpenApi;
using Swashbuckle.AspNetCore.SwaggerGen;

namespace Strayspot.Service.Hosting;

/// <summary>The OpenAPI document (/openapi/v1.json) and the browsable docs (/docs).</summary>
public static class ServiceOpenApi
{
    public const string DocumentPath = "/openapi/v1.json";
    public const string DocsPrefix = "docs";

    public const string Description =
        "Scores camera frames for pixels a segmentation model was not trained on and returns class maps, anomaly " +
        "masks, heat maps and per-region summaries.\n\n" +
        "**Scope.** Strayspot is a data-triage and monitoring aid. It is not a certified safety function and must not " +
        "be the only safeguard of any vehicle, machine or person. Its scores and masks are evidence for people and " +
        "for downstream tooling; the operator validates them on their own data and follows their own procedures and " +
        "local rules, which take precedence over anything this service reports.\n\n" +
        "**Authentication.** Send an API key in the `" + ApiKeyAuthenticationHandler.Header + "` header. Keys are " +
        "required whenever the service listens beyond loopback; `/healthz`, `/readyz` and these docs need none.\n\n" +
        "**Errors.** Every error is an RFC 9457 `application/problem+json` object with a stable `code` member and a " +
        "`traceId` to quote when reporting it.";

    public static void AddServiceOpenApi(this IServiceCollection services)
    {
        services.AddEndpointsApiExplorer();
        services.AddSwaggerGen(c =>
        {
            c.SwaggerDoc("v1", new OpenApiInfo { Title = "Strayspot", Version = "v1", Description = Description });
            c.AddSecurityDefinition(ApiKeyAuthenticationHandler.SchemeName, new OpenApiSecurityScheme
            {
                Type = SecuritySchemeType.ApiKey,
                In = ParameterLocation.Header,
                Name = ApiKeyAuthenticationHandler.Header,
                Description = "An API key; the service stores only its SHA-256.",
            });
            c.AddSecurityRequirement(doc => new OpenApiSecurityRequirement
            {
                [new OpenApiSecuritySchemeReference(ApiKeyAuthenticationHandler.SchemeName, doc)] = [],
            });
            c.SchemaFilter<ExampleSchemaFilter>();
        });
    }

    public static void UseServiceOpenApi(this WebApplication app)
    {
        app.UseSwagger(o => o.RouteTemplate = "openapi/{documentName}.json");
        app.UseSwaggerUI(o =>
        {
            o.RoutePrefix = DocsPrefix;
            o.SwaggerEndpoint(DocumentPath, "Strayspot v1");
            o.DocumentTitle = "Strayspot API";
            o.IndexStream = () => new MemoryStream(System.Text.Encoding.UTF8.GetBytes(DocsPage));
        });
    }

    /// <summary>
    /// The docs page: our own title bar in place of the explorer's stock one (hidden), the explorer itself, and a
    /// footer that keeps the explorer library's licence notice with a link to its licence text, served beside it.
    /// </summary>
    public const string DocsPage = """
        <!DOCTYPE html>
        <html lang="en">
        <head>
            <meta charset="UTF-8">
            <title>Strayspot API</title>
            <link rel="stylesheet" type="text/css" href="./swagger-ui.css">
            <link rel="stylesheet" type="text/css" href="./index.css">
            <link rel="icon" href="data:,">
            <style>
                .swagger-ui .topbar { display: none; }
                .strayspot-bar { display: flex; flex-wrap: wrap; gap: 0.4rem 1.5rem; align-items: baseline; padding: 0.8rem 1.5rem;
                    background: #1d2329; color: #fff; font-family: system-ui, -apple-system, "Segoe UI", Roboto, sans-serif; }
                .strayspot-bar h1 { font-size: 1.35rem; margin: 0; }
                .strayspot-bar span { color: #c9d0d6; }
                .strayspot-bar a { color: #bcd6f5; }
                .strayspot-credit { font: 0.8rem system-ui, sans-serif; color: #5b6670; padding: 1rem 1.5rem 2rem; }
            </style>
        </head>
        <body>
            <header class="strayspot-bar">
                <h1>Strayspot API</h1>
                <span>Finds what a segmentation model was never trained on.</span>
                <a href="/openapi/v1.json">OpenAPI document</a>
                <a href="/review/">Review page</a>
            </header>
            <div id="swagger-ui"></div>
            <footer class="strayspot-credit">
                The explorer on this page is Swagger UI, used under the Apache License, Version 2.0
                (<a href="./LICENSE">licence text</a>).
            </footer>
            <script src="./swagger-ui-bundle.js" charset="utf-8"></script>
            <script src="./swagger-ui-standalone-preset.js" charset="utf-8"></script>
            <script src="index.js" charset="utf-8"></script>
        </body>
        </html>
        """;
}

/// <summary>Examples attached to response schemas, registered by the API areas that own the types.</summary>
public static class SchemaExamples
{
    private static readonly Dictionary<Type, Func<JsonNode>> Examples = new();
    private static readonly Lock Gate = new();

    public static void Register<T>(Func<JsonNode> example)
    {
        lock (Gate) Examples[typeof(T)] = example;
    }

    internal static JsonNode? For(Type type)
    {
        lock (Gate) return Examples.TryGetValue(type, out var make) ? make() : null;
    }
}

internal sealed class ExampleSchemaFilter : ISchemaFilter
{
    public void Apply(IOpenApiSchema schema, SchemaFilterContext context)
    {
        if (schema is OpenApiSchema concrete && SchemaExamples.For(context.Type) is { } example)
            concrete.Examples = [example];
    }
}
