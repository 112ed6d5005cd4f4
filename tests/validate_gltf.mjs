// Runs the Khronos glTF validator (npm package gltf-validator) on one .gltf or .glb file and prints
// its JSON report on stdout. The package is looked up in $GLTF_VALIDATOR_DIR, else in tests/.node
// (install it there with: npm install --no-save --prefix tests/.node gltf-validator).
import { readFileSync, existsSync } from "node:fs";
import { createRequire } from "node:module";
import path from "node:path";
import { fileURLToPath } from "node:url";

const here = path.dirname(fileURLToPath(import.meta.url));
const dir = process.env.GLTF_VALIDATOR_DIR || path.join(here, ".node", "node_modules", "gltf-validator");
if (!existsSync(dir)) {
  console.error(`gltf-validator not found at ${dir}`);
  process.exit(3);
}
const validator = createRequire(import.meta.url)(dir);
const file = process.argv[2];
if (!file) {
  console.error("usage: node validate_gltf.mjs FILE");
  process.exit(2);
}
const bytes = new Uint8Array(readFileSync(file));
const report = await validator.validateBytes(bytes, {
  uri: path.basename(file),
  maxIssues: 200,
  externalResourceFunction: (uri) =>
    Promise.resolve(new Uint8Array(readFileSync(path.resolve(path.dirname(file), decodeURIComponent(uri))))),
});
console.log(JSON.stringify(report, null, 1));
