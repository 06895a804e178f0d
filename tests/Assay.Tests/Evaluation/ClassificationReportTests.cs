using Assay.Evaluation;

namespace Assay.Tests.Evaluation;

public sealed class ClassificationReportTests
{
    [Fact]
    public void A_report_reads_back_from_its_json_and_names_its_classes()
    {
        // Three rows of two classes: predictions 0, 1, 1 against truth 0, 1, 0.
        double[] p = [0.9, 0.1, 0.2, 0.8, 0.4, 0.6];
        ClassificationReport report = ClassificationReport.Score(p, [0, 1, 0], 2, bootstrapSamples: 50);
        var json = report.ToJson(["cat", "dog"]);
        Assert.Equal(["rows", "accuracy", "accuracy_95", "log_loss", "macro_f1", "classes", "confusion"], json.Select(kv => kv.Key));
        Assert.Equal("[\"cat\",\"dog\"]", json["classes"]!.ToJsonString());
        Assert.Equal("[[1,1],[0,1]]", json["confusion"]!.ToJsonString());
        ClassificationReport back = ClassificationReport.FromJson(json);
        Assert.Equal((report.Rows, report.Accuracy, report.AccuracyLow, report.AccuracyHigh, report.LogLoss, report.MacroF1),
            (back.Rows, back.Accuracy, back.AccuracyLow, back.AccuracyHigh, back.LogLoss, back.MacroF1));
        Assert.Equal(report.Confusion, back.Confusion);
        // Log loss by hand (common practice: mean of −ln p of the true class).
        Assert.Equal(-(Math.Log(0.9) + Math.Log(0.8) + Math.Log(0.4)) / 3, report.LogLoss, 12);
    }

    [Fact]
    public void A_label_index_keeps_its_order_and_refuses_duplicates()
    {
        var index = LabelIndex.Sorted(["b", "a", "b", "c"]);
        Assert.Equal(["a", "b", "c"], index.Classes);
        Assert.Equal([1, 0, 2], index.Indices(["b", "a", "c"]));
        Assert.Equal("z", index.FirstUnknown(["a", "z"]));
        Assert.Throws<ArgumentException>(() => new LabelIndex(["a", "a"]));
    }
}
