#!/usr/bin/env bash
# Packs Assay for machines without a network: writes FOLDER with the packages Assay.Engine, Assay.ML,
# Assay.DemoModel and the .NET tool assay, plus every package the libraries depend on, so that a restore or a tool
# install from FOLDER alone succeeds. Copy FOLDER to the offline machine and install from it (README: Packages).
#
#   tools/pack.sh FOLDER
#
# The build goes to a temporary artifacts folder (the tree's bin/ and obj/ are not touched) as a deterministic,
# CI-style build (paths in the assemblies and symbols are repository-relative). The dependencies are taken from this
# machine's NuGet global packages folder, where restoring the solution put them, else from the configured sources.
set -euo pipefail
[ $# -eq 1 ] || { echo "usage: tools/pack.sh FOLDER" >&2; exit 2; }
root=$(cd "$(dirname "$0")/.." && pwd)
mkdir -p "$1"
feed=$(cd "$1" && pwd)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
export DOTNET_CLI_TELEMETRY_OPTOUT=1 DOTNET_NOLOGO=1

version=$(sed -n 's:.*<Version>\(.*\)</Version>.*:\1:p' "$root/Directory.Build.props")
libraries=(Assay.Engine Assay.ML Assay.DemoModel)
for project in "${libraries[@]}" Assay.Cli; do
  echo "pack.sh: packing $project $version" >&2
  dotnet pack "$root/src/$project/$project.csproj" -c Release -o "$feed" --artifacts-path "$work/artifacts" \
    -p:ContinuousIntegrationBuild=true -nologo -v quiet >&2
done

# The libraries' dependency closure: what a fresh restore of a project referencing all three downloads.
global=$(dotnet nuget locals global-packages --list | sed 's/^global-packages: //')
mkdir "$work/closure"
{
  echo '<Project Sdk="Microsoft.NET.Sdk"><PropertyGroup><TargetFramework>net10.0</TargetFramework></PropertyGroup><ItemGroup>'
  for id in "${libraries[@]}"; do echo "<PackageReference Include=\"$id\" Version=\"$version\" />"; done
  echo '</ItemGroup></Project>'
} > "$work/closure/closure.csproj"
cat > "$work/closure/nuget.config" <<EOF
<configuration><packageSources><add key="assay" value="$feed" /><add key="machine" value="$global" /></packageSources></configuration>
EOF
NUGET_PACKAGES="$work/packages" dotnet restore "$work/closure/closure.csproj" -nologo -v quiet >&2
find "$work/packages" -name '*.nupkg' | while read -r nupkg; do
  case $(basename "$nupkg") in assay.*) ;; *) cp "$nupkg" "$feed/" ;; esac   # (Assay's own are there already)
done

echo "pack.sh: $feed holds $(find "$feed" -name '*.nupkg' | wc -l) packages, $(du -sh "$feed" | cut -f1):" >&2
(cd "$feed" && ls -1 assay.*.nupkg Assay.*.nupkg 2>/dev/null | while read -r f; do printf '  %-36s %8s KiB\n' "$f" "$(( $(stat -c %s "$f") / 1024 ))"; done) >&2
