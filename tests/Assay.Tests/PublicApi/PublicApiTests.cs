using System.Reflection;
using Assay.Model;

namespace Assay.Tests.PublicApi;

/// <summary>
/// The engine's public surface is a reviewed artifact: any change shows up as a diff of PublicApi/Assay.Engine.txt.
/// After a deliberate change, copy the .received file the failure names over the committed one.
/// </summary>
public sealed class PublicApiTests
{
    [Fact]
    public void Public_surface_matches_the_committed_listing()
    {
        string actual = Describe(typeof(LanguageModel).Assembly);
        string committed = Path.Combine(SourceFolder(), "Assay.Engine.txt");
        string expected = File.Exists(committed) ? File.ReadAllText(committed).ReplaceLineEndings("\n") : "";
        if (actual != expected)
        {
            File.WriteAllText(committed + ".received", actual);
        }
        Assert.True(actual == expected, $"public API changed; review {committed}.received and copy it over {committed}");
    }

    private static string Describe(Assembly assembly)
    {
        var lines = new List<string>();
        foreach (Type t in assembly.GetExportedTypes().OrderBy(t => t.FullName, StringComparer.Ordinal))
        {
            lines.Add($"{Kind(t)} {t.FullName}");
            const BindingFlags Flags = BindingFlags.Public | BindingFlags.Instance | BindingFlags.Static | BindingFlags.DeclaredOnly;
            foreach (string m in t.GetMembers(Flags)
                .Where(m => m is not MethodInfo { IsSpecialName: true } && m.Name != "<Clone>$")
                .Select(Member).Order(StringComparer.Ordinal))
            {
                lines.Add("  " + m);
            }
        }
        return string.Join("\n", lines) + "\n";
    }

    private static string Kind(Type t) =>
        t.IsEnum ? "enum" : t.IsValueType ? "struct" : t.IsInterface ? "interface" : t.IsAbstract && t.IsSealed ? "static class" : "class";

    private static string Member(MemberInfo m) => m switch
    {
        MethodInfo mi => $"{(mi.IsStatic ? "static " : "")}{mi.ReturnType.Name} {mi.Name}({Parameters(mi)})",
        ConstructorInfo ci => $"ctor({Parameters(ci)})",
        PropertyInfo pi => $"{pi.PropertyType.Name} {pi.Name} {{ {(pi.GetMethod?.IsPublic == true ? "get; " : "")}{(pi.SetMethod?.IsPublic == true ? "set; " : "")}}}",
        FieldInfo fi => $"{(fi.IsLiteral ? "const " : fi.IsStatic ? "static " : "")}{fi.FieldType.Name} {fi.Name}",
        _ => $"{m.MemberType} {m.Name}",
    };

    private static string Parameters(MethodBase m) => string.Join(", ", m.GetParameters().Select(p => $"{p.ParameterType.Name} {p.Name}"));

    private static string SourceFolder([System.Runtime.CompilerServices.CallerFilePath] string path = "") => Path.GetDirectoryName(path)!;
}
