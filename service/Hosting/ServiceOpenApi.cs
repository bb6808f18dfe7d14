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
        });
    }
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
