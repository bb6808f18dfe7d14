using System.Security.Claims;
using System.Security.Cryptography;
using System.Text.Encodings.Web;
using Microsoft.AspNetCore.Authentication;
using Microsoft.AspNetCore.Authorization;
using Microsoft.Extensions.Options;
using Strayspot.Service.Api;

namespace Strayspot.Service.Hosting;

/// <summary>Authenticates a request by the SHA-256 of its <c>X-Api-Key</c> header. The key itself is never stored or logged.</summary>
public sealed class ApiKeyAuthenticationHandler(
    IOptionsMonitor<AuthenticationSchemeOptions> schemeOptions,
    ILoggerFactory logger,
    UrlEncoder encoder,
    IOptions<ServiceOptions> service,
    IProblemDetailsService problems)
    : AuthenticationHandler<AuthenticationSchemeOptions>(schemeOptions, logger, encoder)
{
    public const string SchemeName = "ApiKey";
    public const string Header = "X-Api-Key";
    public const string ScopeClaim = "scope";

    private readonly IReadOnlyList<(ApiKeyOptions Key, byte[] Hash)> _keys = service.Value.ApiKeys
        .Select(k => (k, ApiKeyHash.TryParseHex(k.Sha256, out var h) ? h : new byte[32]))
        .ToList();

    protected override Task<AuthenticateResult> HandleAuthenticateAsync()
    {
        if (!Request.Headers.TryGetValue(Header, out var values) || values.Count == 0 || string.IsNullOrEmpty(values[0]))
            return Task.FromResult(AuthenticateResult.NoResult());
        if (values.Count > 1)
            return Task.FromResult(AuthenticateResult.Fail($"Send exactly one {Header} header."));

        byte[] presented = ApiKeyHash.Of(values[0]!);
        ApiKeyOptions? match = null;
        // Visit every key with no early exit: the time taken does not depend on which key (if any) matched.
        foreach (var (key, hash) in _keys)
            if (CryptographicOperations.FixedTimeEquals(presented, hash) && match is null)
                match = key;
        if (match is null)
            return Task.FromResult(AuthenticateResult.Fail($"The {Header} header does not hold an accepted key."));

        var claims = new List<Claim> { new(ClaimTypes.Name, string.IsNullOrEmpty(match.Name) ? "unnamed-key" : match.Name) };
        claims.AddRange(match.Scopes.Select(s => new Claim(ScopeClaim, s)));
        var principal = new ClaimsPrincipal(new ClaimsIdentity(claims, SchemeName));
        return Task.FromResult(AuthenticateResult.Success(new AuthenticationTicket(principal, SchemeName)));
    }

    protected override async Task HandleChallengeAsync(AuthenticationProperties properties)
    {
        var result = await HandleAuthenticateOnceSafeAsync();
        string detail = result.Failure?.Message ?? $"Send an accepted API key in the {Header} header.";
        Response.StatusCode = StatusCodes.Status401Unauthorized;
        Response.Headers.WWWAuthenticate = $"{SchemeName} header=\"{Header}\"";
        await WriteProblem(ErrorCodes.Unauthorized, detail);
    }

    protected override async Task HandleForbiddenAsync(AuthenticationProperties properties)
    {
        Response.StatusCode = StatusCodes.Status403Forbidden;
        await WriteProblem(ErrorCodes.Forbidden, "This API key lacks the scope this endpoint needs (e.g. 'admin').");
    }

    private Task WriteProblem(string code, string detail)
    {
        var row = ErrorCodes.Get(code);
        return problems.WriteAsync(new ProblemDetailsContext
        {
            HttpContext = Context,
            ProblemDetails = { Status = row.Status, Title = row.Title, Detail = detail, Type = ErrorCodes.TypeUri(code), Extensions = { ["code"] = code } },
        }).AsTask();
    }
}

/// <summary>Requires a scope on the key; when the service runs without keys (loopback only) there is nobody to tell apart.</summary>
public sealed class ScopeRequirement(string scope) : IAuthorizationRequirement
{
    public string Scope { get; } = scope;
}

public sealed class ScopeHandler(IOptions<ServiceOptions> service) : AuthorizationHandler<ScopeRequirement>
{
    protected override Task HandleRequirementAsync(AuthorizationHandlerContext context, ScopeRequirement requirement)
    {
        if (service.Value.ApiKeys.Count == 0 || context.User.HasClaim(ApiKeyAuthenticationHandler.ScopeClaim, requirement.Scope))
            context.Succeed(requirement);
        return Task.CompletedTask;
    }
}

public static class ApiPolicies
{
    public const string Admin = "admin";
}
