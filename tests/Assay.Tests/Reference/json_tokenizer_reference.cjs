#!/usr/bin/node
// An independent implementation of JSON tokenizer definitions (the pure-JavaScript npm package that package.json
// beside this script pins), the outside reference for the engine's reader.
// usage: node json_tokenizer_reference.cjs CASES_JSON
// CASES_JSON: [{"definition": path, "lines": [text, ...]}, ...]. Prints JSON: [{"ids": [[...], ...], "special": [[...], ...]}]
// ("ids" without the post-processor's special tokens, "special" with them).
const fs = require("fs");
const path = require("path");
// The one dependency package.json names, so the package is named in one place.
const [library] = Object.keys(JSON.parse(fs.readFileSync(path.join(__dirname, "package.json"), "utf8")).dependencies);
const { Tokenizer } = require(library);
const cases = JSON.parse(fs.readFileSync(process.argv[2], "utf8"));
const out = cases.map((c) => {
  const tokenizer = new Tokenizer(JSON.parse(fs.readFileSync(c.definition, "utf8")), {});
  return {
    ids: c.lines.map((l) => tokenizer.encode(l, { add_special_tokens: false }).ids),
    special: c.lines.map((l) => tokenizer.encode(l, { add_special_tokens: true }).ids),
  };
});
process.stdout.write(JSON.stringify(out));
