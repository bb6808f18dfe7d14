using System.CommandLine;
using System.CommandLine.Parsing;
using Strayspot.Service.Models;

namespace Strayspot.Service.Cli;

/// <summary>
/// Finds a token that looks like an option but is none of the verb's: verbs with a list argument would otherwise
/// take it (and its value) for file names.
/// </summary>
public static class UnknownOptions
{
    /// <summary>The refusal message for the first unknown option, or null when there is none.</summary>
    public static string? Find(ParseResult parsed)
    {
        var command = parsed.CommandResult.Command;
        var tokens = new List<string>(parsed.UnmatchedTokens);
        foreach (var child in parsed.CommandResult.Children)
            if (child is ArgumentResult argument)
                foreach (var t in argument.Tokens) tokens.Add(t.Value);
        foreach (string token in tokens)
        {
            if (!LooksLikeOption(token)) continue;
            string given = token.Split('=', 2)[0];
            var names = new List<string>();
            for (Command? c = command; c is not null; c = null)
                foreach (var o in c.Options)
                {
                    if (o.Hidden) continue;
                    names.Add(o.Name);
                    names.AddRange(o.Aliases);
                }
            var real = names.Where(n => n.StartsWith("--", StringComparison.Ordinal)).Distinct().Order(StringComparer.Ordinal).ToList();
            string? nearest = NearestName.Find(given, real);
            string hint = nearest is not null ? $" Did you mean '{nearest}'?" : "";
            return $"'{given}' is not an option of '{command.Name}'.{hint} Its options: {string.Join(", ", real)}.";
        }
        return null;
    }

    // "-0.5" is a value (a negative threshold), "-x"/"--x" an option.
    private static bool LooksLikeOption(string token) =>
        token.Length > 1 && token[0] == '-' && (char.IsLetter(token[1]) || (token[1] == '-' && token.Length > 2));
}
