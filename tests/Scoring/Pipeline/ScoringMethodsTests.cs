using System.Text.Json;
using Strayspot.Scoring.Evaluation;
using Strayspot.Scoring.Logits;
using Strayspot.Scoring.Pipeline;
using Strayspot.Scoring.Standardization;
using Strayspot.Service.Api;
using Strayspot.Service.Cli;

namespace Strayspot.Tests.Scoring.Pipeline;

/// <summary>The table of scoring methods against everything that names or runs a method.</summary>
public class ScoringMethodsTests
{
    public static TheoryData<ScoreMethod> Methods()
    {
        var data = new TheoryData<ScoreMethod>();
        foreach (var m in ScoringMethods.All) data.Add(m.Id);
        return data;
    }

    [Fact]
    public void Every_method_of_the_enum_has_one_entry()
    {
        Assert.Equal(Enum.GetValues<ScoreMethod>().Order(), ScoringMethods.All.Select(m => m.Id).Order());
        Assert.Equal(ScoringMethods.All.Count, ScoringMethods.All.Select(m => m.Name).Distinct(StringComparer.OrdinalIgnoreCase).Count());
    }

    [Theory]
    [MemberData(nameof(Methods))]
    public void Api_cli_and_json_spell_the_method_as_the_table_does(ScoreMethod id)
    {
        var m = ScoringMethods.Of(id);
        Assert.Equal($"\"{m.Name}\"", JsonSerializer.Serialize(id));
        Assert.Equal(id, JsonSerializer.Deserialize<ScoreMethod>($"\"{m.Name}\""));
        Assert.Equal(id, ScoringForm.ParseMethod(m.Name));
        Assert.Equal(id, ScoringForm.ParseMethod(m.Name.ToUpperInvariant()));
        Assert.Equal(id, ScoringOptionsBinding.ParseMethod(m.Name));
        foreach (string alias in m.CliAliases)
        {
            Assert.Equal(id, ScoringOptionsBinding.ParseMethod(alias));
            Assert.Null(ScoringForm.ParseMethod(alias));
        }
    }

    [Theory]
    [MemberData(nameof(Methods))]
    public void The_evaluation_compares_every_method_under_its_name(ScoreMethod id)
    {
        var m = ScoringMethods.Of(id);
        var evaluated = Assert.Single(EvaluatedMethods.All, e => EvaluatedMethods.Name(e) == m.Name);
        Assert.Equal(id, EvaluatedMethods.BaseOf(evaluated));
        Assert.Equal(m.NeedsStatistics, EvaluatedMethods.NeedsStatistics(evaluated));
        Assert.Equal(id, EvaluatedMethods.OptionsFor(evaluated, new ScoringOptions()).Method);
    }

    [Theory]
    [MemberData(nameof(Methods))]
    public void The_pipeline_reads_the_outputs_and_statistics_need_from_the_table(ScoreMethod id)
    {
        var m = ScoringMethods.Of(id);
        Assert.Equal(m.Outputs, FramePipeline.OutputsFor(id));
        var options = new ScoringOptions { Method = id, MinimumRegionArea = 1 };
        if (m.NeedsStatistics)
            Assert.Equal(ScoringErrorCodes.StatisticsMismatch, Assert.Throws<ScoringInputException>(() => new FramePipeline(options, null)).Code);
        var stats = new ClassStatistics([new("a", 1000, 3, 1), new("b", 1000, 2, 0.5)]);
        var pipeline = new FramePipeline(options, m.NeedsStatistics ? stats : null);
        var logits = new LogitsView(new float[] { 1, 4, 2, 0, 3, 1, 5, 2 }, 2, 2, 2);
        var scored = pipeline.Score(logits, 4, 4);
        Assert.Equal(16, scored.AnomalyScore.Length);
        Assert.All(scored.AnomalyScore.ToArray(), v => Assert.True(float.IsFinite(v)));
        // The multi-method scorer makes the same map from the same entry, bit for bit.
        var evaluated = EvaluatedMethods.All.Single(e => EvaluatedMethods.Name(e) == m.Name);
        var all = new MultiMethodScorer(m.NeedsStatistics ? stats : null, new MultiMethodOptions
        {
            Base = new ScoringOptions { BoundarySuppression = new() { Enabled = false }, Smoothing = new() { Enabled = false } },
            Methods = [evaluated],
        });
        all.Score(logits, 4, 4);
        var alone = new FramePipeline(options with { BoundarySuppression = new() { Enabled = false }, Smoothing = new() { Enabled = false } },
            m.NeedsStatistics ? stats : null).Score(logits, 4, 4);
        Assert.Equal(alone.AnomalyScore.ToArray(), all.Map(evaluated).ToArray());
    }

    [Fact]
    public void Unknown_names_are_refused_with_the_table_listed()
    {
        Assert.Null(ScoringForm.ParseMethod("softmax"));
        var e = Assert.Throws<ScoringInputException>(() => ScoringOptionsBinding.ParseMethod("softmax"));
        foreach (var m in ScoringMethods.All) Assert.Contains(m.Name, e.Message);
    }
}
