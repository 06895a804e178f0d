using Assay.Features;
using Microsoft.ML;

namespace Assay.ML;

/// <summary>Assay's data views from ML.NET's data catalog (<c>mlContext.Data</c>).</summary>
public static class AssayDataCatalog
{
    /// <summary>A finished run folder's features as a data view; see <see cref="RunFolderDataView"/>.</summary>
    /// <inheritdoc cref="RunFolderDataView.Load(string, IReadOnlyList{string})"/>
    public static RunFolderDataView LoadFromRunFolder(this DataOperationsCatalog catalog, string runFolder, params IReadOnlyList<string> features)
    {
        ArgumentNullException.ThrowIfNull(catalog);
        return RunFolderDataView.Load(runFolder, features);
    }

    /// <summary>An extractor's features of texts as a data view, computed as it is read; see <see cref="ExtractionDataView"/>.</summary>
    /// <inheritdoc cref="ExtractionDataView(FeatureExtractor, IEnumerable{string}, IEnumerable{string}?)"/>
    public static ExtractionDataView LoadFromExtractor(this DataOperationsCatalog catalog, FeatureExtractor extractor, IEnumerable<string> texts, IEnumerable<string>? labels = null)
    {
        ArgumentNullException.ThrowIfNull(catalog);
        return new ExtractionDataView(extractor, texts, labels);
    }
}
