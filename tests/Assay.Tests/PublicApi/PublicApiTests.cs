using System.Globalization;
using System.Reflection;
using System.Runtime.CompilerServices;
using Assay.Model;

namespace Assay.Tests.PublicApi;

/// <summary>
/// Each library package's public surface is a reviewed artifact: any change shows up as a diff of PublicApi/PACKAGE.txt,
/// written as C# signatures (generic arguments, nullability, init and required accessors, default values, records).
/// After a deliberate change, copy the .received file the failure names over the committed one.
/// </summary>
public sealed class PublicApiTests
{
    private static readonly NullabilityInfoContext Nullability = new();

    /// <summary>Every library package's assembly (the tool and the content package have no public API).</summary>
    public static TheoryData<string> Packages => ["Assay.Engine", "Assay.ML"];

    [Theory]
    [MemberData(nameof(Packages))]
    public void Public_surface_matches_the_committed_listing(string package)
    {
        Assembly assembly = package == "Assay.ML" ? typeof(Assay.ML.RunFolderDataView).Assembly : typeof(LanguageModel).Assembly;
        Assert.Equal(package, assembly.GetName().Name);
        string actual = Describe(assembly);
        string committed = Path.Combine(SourceFolder(), package + ".txt");
        string expected = File.Exists(committed) ? File.ReadAllText(committed).ReplaceLineEndings("\n") : "";
        if (actual != expected)
        {
            File.WriteAllText(committed + ".received", actual);
        }
        Assert.True(actual == expected, $"public API changed; review {committed}.received and copy it over {committed}");
    }

    [Fact]
    public void Signatures_show_generics_nullability_accessors_and_defaults()
    {
        // The describer itself, on members whose C# signatures are known.
        Assert.Equal("IReadOnlyList<FeatureRequest> Features { get; init; }",
            Member(typeof(Assay.Features.ExtractionOptions).GetProperty("Features")!));
        Assert.Equal("required int Width { get; init; }", Member(typeof(Assay.Config.ModelConfig).GetProperty("Width")!));
        Assert.Equal("static CrossEntropyResult Score(LanguageModel model, IEnumerable<string> texts, int? stride = null, int maxThreads = 0, IProgress<ExtractionProgress>? progress = null, BeginningOfSequence bos = BeginningOfSequence.Auto)",
            Member(typeof(Assay.Evaluation.CrossEntropy).GetMethod("Score")!));
        Assert.Equal("sealed record class Assay.Features.HiddenStateFeature : FeatureRequest", Declaration(typeof(Assay.Features.HiddenStateFeature)));
    }

    private static string Describe(Assembly assembly)
    {
        var lines = new List<string>();
        foreach (Type t in assembly.GetExportedTypes().OrderBy(t => t.FullName, StringComparer.Ordinal))
        {
            lines.Add(Declaration(t));
            const BindingFlags Flags = BindingFlags.Public | BindingFlags.Instance | BindingFlags.Static | BindingFlags.DeclaredOnly;
            foreach (string m in t.GetMembers(Flags)
                .Where(m => m is not MethodInfo { IsSpecialName: true } && m.Name != "<Clone>$" && !(t.IsEnum && m.Name == "value__"))
                .Select(Member).Order(StringComparer.Ordinal))
            {
                lines.Add("  " + m);
            }
        }
        return string.Join("\n", lines) + "\n";
    }

    private static string Declaration(Type t)
    {
        bool record = t.GetMethod("<Clone>$") != null
            || (t.IsValueType && t.GetMethod("PrintMembers", BindingFlags.NonPublic | BindingFlags.Instance) != null);
        string kind = t.IsEnum ? "enum" : t.IsInterface ? "interface"
            : t.IsValueType ? (t.IsDefined(typeof(IsReadOnlyAttribute)) ? "readonly " : "") + (record ? "record struct" : "struct")
            : (t.IsAbstract && t.IsSealed ? "static " : t.IsAbstract ? "abstract " : t.IsSealed ? "sealed " : "") + (record ? "record class" : "class");
        var bases = new List<string>();
        if (t.BaseType is { } b && b != typeof(object) && b != typeof(ValueType) && b != typeof(Enum))
        {
            bases.Add(Name(b));
        }
        // Interfaces the type adds itself (not its base's, not an enum's, not a record's IEquatable).
        Type[] inherited = t.BaseType?.GetInterfaces() ?? [];
        bases.AddRange(t.GetInterfaces()
            .Where(i => i.IsPublic && !t.IsEnum && !inherited.Contains(i) && !(record && i.IsGenericType && i.GetGenericTypeDefinition() == typeof(IEquatable<>)))
            .Select(i => Name(i)).Order(StringComparer.Ordinal));
        return $"{kind} {t.FullName}{(bases.Count > 0 ? " : " + string.Join(", ", bases) : "")}";
    }

    private static string Member(MemberInfo m) => m switch
    {
        MethodInfo mi => $"{(mi.IsStatic ? "static " : "")}{(mi.IsAbstract && !mi.DeclaringType!.IsInterface ? "abstract " : mi.IsVirtual && !mi.IsFinal && mi.GetBaseDefinition() == mi ? "virtual " : "")}"
            + $"{Name(mi.ReturnType, Nullability.Create(mi.ReturnParameter), TupleNames(mi.ReturnParameter))} {mi.Name}{GenericParameters(mi)}({Parameters(mi)})",
        ConstructorInfo ci => $"ctor({Parameters(ci)})",
        PropertyInfo pi => $"{(pi.GetCustomAttributesData().Any(a => a.AttributeType.FullName == "System.Runtime.CompilerServices.RequiredMemberAttribute") ? "required " : "")}{((pi.GetMethod ?? pi.SetMethod)!.IsStatic ? "static " : "")}"
            + $"{Name(pi.PropertyType, Nullability.Create(pi), TupleNames(pi))} {pi.Name} {{ {(pi.GetMethod?.IsPublic == true ? "get; " : "")}{Setter(pi)}}}",
        FieldInfo fi when fi.DeclaringType!.IsEnum => $"{fi.Name} = {Convert.ToInt64(fi.GetRawConstantValue(), CultureInfo.InvariantCulture)}",
        FieldInfo fi => $"{(fi.IsLiteral ? "const " : fi.IsStatic ? "static " : "")}{(fi.IsInitOnly ? "readonly " : "")}{Name(fi.FieldType, Nullability.Create(fi))} {fi.Name}"
            + (fi.IsLiteral ? " = " + Literal(fi.GetRawConstantValue()) : ""),
        _ => $"{m.MemberType} {m.Name}",
    };

    private static string Setter(PropertyInfo pi) => pi.SetMethod?.IsPublic != true ? ""
        : pi.SetMethod.ReturnParameter.GetRequiredCustomModifiers().Contains(typeof(IsExternalInit)) ? "init; " : "set; ";

    private static string GenericParameters(MethodInfo mi) =>
        mi.IsGenericMethodDefinition ? "<" + string.Join(", ", mi.GetGenericArguments().Select(a => a.Name)) + ">" : "";

    private static string Parameters(MethodBase m) => string.Join(", ", m.GetParameters().Select(p =>
        (p.IsOut ? "out " : p.ParameterType.IsByRef ? (p.IsIn ? "in " : "ref ") : p.IsDefined(typeof(ParamArrayAttribute)) ? "params " : "")
        + $"{Name(p.ParameterType.IsByRef ? p.ParameterType.GetElementType()! : p.ParameterType, Nullability.Create(p), TupleNames(p))} {p.Name}"
        + (p.HasDefaultValue ? " = " + (p.DefaultValue == null && p.ParameterType.IsValueType && Nullable.GetUnderlyingType(p.ParameterType) == null ? "default" : Literal(p.DefaultValue)) : "")));

    /// <summary>The element names of the tuples in a member's type, in the order C# lists them (depth first).</summary>
    private static Queue<string?>? TupleNames(ICustomAttributeProvider member) =>
        member.GetCustomAttributes(typeof(TupleElementNamesAttribute), false) is [TupleElementNamesAttribute a, ..] ? new Queue<string?>(a.TransformNames) : null;

    private static string Literal(object? value) => value switch
    {
        null => "null",
        string s => "\"" + s + "\"",
        bool b => b ? "true" : "false",
        char c => "'" + c + "'",
        Enum e => e.GetType().Name + "." + e,
        IFormattable f => f.ToString(null, CultureInfo.InvariantCulture),
        _ => value.ToString() ?? "",
    };

    private static readonly Dictionary<Type, string> Keywords = new()
    {
        [typeof(void)] = "void", [typeof(bool)] = "bool", [typeof(byte)] = "byte", [typeof(sbyte)] = "sbyte", [typeof(short)] = "short",
        [typeof(ushort)] = "ushort", [typeof(int)] = "int", [typeof(uint)] = "uint", [typeof(long)] = "long", [typeof(ulong)] = "ulong",
        [typeof(float)] = "float", [typeof(double)] = "double", [typeof(decimal)] = "decimal", [typeof(char)] = "char",
        [typeof(string)] = "string", [typeof(object)] = "object",
    };

    /// <summary>A type as C# writes it, with nullable annotations where <paramref name="n"/> gives them.</summary>
    private static string Name(Type t, NullabilityInfo? n = null, Queue<string?>? tupleNames = null)
    {
        if (Nullable.GetUnderlyingType(t) is { } inner)
        {
            return Name(inner, n?.GenericTypeArguments.FirstOrDefault(), tupleNames) + "?";
        }
        string nullable = n is { ReadState: NullabilityState.Nullable } && !t.IsValueType ? "?" : "";
        if (Keywords.TryGetValue(t, out string? keyword))
        {
            return keyword + nullable;
        }
        if (t.IsArray)
        {
            return Name(t.GetElementType()!, n?.ElementType, tupleNames) + "[" + new string(',', t.GetArrayRank() - 1) + "]" + nullable;
        }
        if (t.IsGenericType)
        {
            string bare = t.Name[..t.Name.IndexOf('`', StringComparison.Ordinal)];
            Type[] args = t.GetGenericArguments();
            if (bare == "ValueTuple")
            {
                // The names of this tuple's elements come first, then those of tuples nested in its elements.
                string?[] names = [.. args.Select(_ => tupleNames is { Count: > 0 } ? tupleNames.Dequeue() : null)];
                return "(" + string.Join(", ", args.Select((a, i) => Name(a, n?.GenericTypeArguments.ElementAtOrDefault(i), tupleNames) + (names[i] is { } name ? " " + name : ""))) + ")" + nullable;
            }
            return bare + "<" + string.Join(", ", args.Select((a, i) => Name(a, n?.GenericTypeArguments.ElementAtOrDefault(i), tupleNames))) + ">" + nullable;
        }
        return t.Name + nullable;
    }

    private static string SourceFolder([CallerFilePath] string path = "") => Path.GetDirectoryName(path)!;
}
