namespace Assay.Evaluation;

/// <summary>Class names and their indices, the order every probability matrix and confusion matrix of a task uses.</summary>
public sealed class LabelIndex
{
    private readonly Dictionary<string, int> _index;

    /// <summary>Indexes <paramref name="classes"/> in the order given.</summary>
    /// <exception cref="ArgumentException">A class is listed twice.</exception>
    public LabelIndex(IEnumerable<string> classes)
    {
        ArgumentNullException.ThrowIfNull(classes);
        Classes = [.. classes];
        _index = new Dictionary<string, int>(Classes.Count, StringComparer.Ordinal);
        for (int i = 0; i < Classes.Count; i++)
        {
            if (!_index.TryAdd(Classes[i], i))
            {
                throw new ArgumentException($"class \"{Classes[i]}\" is listed twice", nameof(classes));
            }
        }
    }

    /// <summary>The classes, index order.</summary>
    public IReadOnlyList<string> Classes { get; }

    /// <summary>Number of classes.</summary>
    public int Count => Classes.Count;

    /// <summary>The labels' distinct values in ordinal order (the order probes use).</summary>
    public static LabelIndex Sorted(IEnumerable<string> labels) => new(labels.Distinct(StringComparer.Ordinal).Order(StringComparer.Ordinal));

    /// <summary>The index of a class, when it is one.</summary>
    public bool TryGetIndex(string label, out int index) => _index.TryGetValue(label, out index);

    /// <summary>The first label that is not a class, or null.</summary>
    public string? FirstUnknown(IEnumerable<string> labels) => labels.FirstOrDefault(l => !_index.ContainsKey(l));

    /// <summary>The indices of labels that are all classes.</summary>
    public int[] Indices(IEnumerable<string> labels) => [.. labels.Select(l => _index[l])];
}
