using Assay.Evaluation;
using Assay.Features;
using Assay.Input;
using Assay.Model;
using Assay.Output;

namespace Assay.Tests.PublicApi;

/// <summary>
/// The options records refuse an invalid value where it is set, in an initializer or a <c>with</c> expression, so a
/// library user learns of it on the line that made it rather than when a run starts (common practice for .NET
/// options types: the argument exceptions name the property).
/// </summary>
public sealed class OptionsValidationTests
{
    [Fact]
    public void Extraction_options_refuse_a_bad_budget_thread_count_or_feature_list()
    {
        Assert.Equal("TokenBudget", Assert.Throws<ArgumentOutOfRangeException>(() => new ExtractionOptions { TokenBudget = 0 }).ParamName);
        Assert.Equal("MaxThreads", Assert.Throws<ArgumentOutOfRangeException>(() => new ExtractionOptions { MaxThreads = -1 }).ParamName);
        Assert.Equal("Features", Assert.Throws<ArgumentException>(() => new ExtractionOptions { Features = [] }).ParamName);
        Assert.Equal("Features", Assert.Throws<ArgumentException>(() => new ExtractionOptions { Features = [new ConditionalMeanFeature(), null!] }).ParamName);
        Assert.Throws<ArgumentNullException>(() => new ExtractionOptions { Prompt = null! });
        var valid = new ExtractionOptions { TokenBudget = 1, MaxThreads = 0 };
        Assert.Throws<ArgumentOutOfRangeException>(() => valid with { TokenBudget = -5 });
        Assert.Equal(1, valid.TokenBudget);
    }

    [Fact]
    public void Extraction_options_keep_their_own_copy_of_the_feature_list()
    {
        var list = new List<FeatureRequest> { new ConditionalMeanFeature() };
        var options = new ExtractionOptions { Features = list };
        list.Add(new HiddenStateFeature(-1));
        Assert.Single(options.Features);
    }

    [Fact]
    public void Run_options_refuse_a_bad_commit_size_and_resume_with_overwrite_in_either_order()
    {
        Assert.Equal("CommitRows", Assert.Throws<ArgumentOutOfRangeException>(() => new RunOptions { CommitRows = 0 }).ParamName);
        Assert.Contains("exclude each other", Assert.Throws<ArgumentException>(() => new RunOptions { Resume = true, Overwrite = true }).Message);
        Assert.Contains("exclude each other", Assert.Throws<ArgumentException>(() => new RunOptions { Overwrite = true, Resume = true }).Message);
        Assert.Throws<ArgumentException>(() => new RunOptions { Resume = true } with { Overwrite = true });
        Assert.Throws<ArgumentNullException>(() => new RunOptions { Extraction = null! });
        Assert.Throws<ArgumentException>(() => new RunOptions { Fields = new InputFields { Text = "" } });
        Assert.False(new RunOptions { Resume = true, Overwrite = false }.Overwrite);
    }

    [Fact]
    public void Forward_options_refuse_a_negative_thread_count()
    {
        Assert.Equal("MaxThreads", Assert.Throws<ArgumentOutOfRangeException>(() => new ForwardOptions { MaxThreads = -2 }).ParamName);
        Assert.Throws<ArgumentNullException>(() => new ForwardOptions { HiddenLayers = null! });
        Assert.Equal(3, new ForwardOptions { MaxThreads = 3 }.MaxThreads);
    }

    [Fact]
    public void Probe_options_refuse_too_few_folds_and_a_grid_that_is_empty_or_not_positive()
    {
        Assert.Equal("Folds", Assert.Throws<ArgumentOutOfRangeException>(() => new ProbeOptions { Folds = 1 }).ParamName);
        Assert.Equal("InverseRegularizations", Assert.Throws<ArgumentException>(() => new ProbeOptions { InverseRegularizations = [] }).ParamName);
        foreach (double bad in new[] { 0, -1, double.NaN, double.PositiveInfinity })
        {
            Assert.Equal(bad, Assert.Throws<ArgumentOutOfRangeException>(() => new ProbeOptions { InverseRegularizations = [1, bad] }).ActualValue);
        }
        Assert.Equal([0.5, 2.0], new ProbeOptions { InverseRegularizations = [0.5, 2] }.InverseRegularizations);
    }
}
