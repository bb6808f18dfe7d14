// Validates rendered Kubernetes objects (multi-document YAML on stdin) against the API's JSON schemas as the npm
// package kubernetes-models ships them, and refuses fields the schemas do not know: its compiled validators allow
// unknown fields, so every object is validated through a proxy that records which fields the validator looked
// at; a field it never looked at, on an object whose fields it checked, is unknown to the schema.
// Usage: node validate-manifests.mjs NODE_MODULES_DIR [JSON_OUT] < rendered.yaml   (exit 0 = all valid; 1 = problems listed)
// JSON_OUT receives the objects as a JSON array, for checks of their values.
import { createRequire } from "node:module";
import { pathToFileURL } from "node:url";
import path from "node:path";
import fs from "node:fs";

const modules = process.argv[2];
const require = createRequire(path.join(modules, "noop.js"));
const YAML = require("yaml");
const groups = { "": "Core", apps: "Apps", batch: "Batch", policy: "Policy", autoscaling: "Autoscaling" };

const docs = YAML.parseAllDocuments(fs.readFileSync(0, "utf8")).map(d => d.toJS()).filter(d => d);
const problems = [];
for (const doc of docs) {
  const [group, version] = doc.apiVersion.includes("/") ? doc.apiVersion.split("/") : ["", doc.apiVersion];
  const name = `${doc.kind}/${doc.metadata?.name}`;
  if (!(group in groups)) { problems.push(`${name}: no schema known for apiVersion ${doc.apiVersion}`); continue; }
  const schema = `IoK8sApi${groups[group]}${version[0].toUpperCase()}${version.slice(1)}${doc.kind}`;
  const file = path.join(modules, "kubernetes-models", "_schemas", `${schema}.js`);
  if (!fs.existsSync(file)) { problems.push(`${name}: kubernetes-models has no schema ${schema}`); continue; }
  const { validate } = await import(pathToFileURL(file).href);

  const seen = new WeakMap();     // object -> Set of fields the validator read
  const listed = new WeakSet();   // objects whose keys the validator enumerated (maps such as labels)
  const proxies = new WeakMap();
  const wrap = v => {
    if (v === null || typeof v !== "object") return v;
    if (proxies.has(v)) return proxies.get(v);
    seen.set(v, new Set());
    const p = new Proxy(v, {
      get(t, k) { if (typeof k === "string") seen.get(t).add(k); return wrap(Reflect.get(t, k)); },
      has(t, k) { if (typeof k === "string") seen.get(t).add(k); return Reflect.has(t, k); },
      ownKeys(t) { listed.add(t); return Reflect.ownKeys(t); },
    });
    proxies.set(v, p);
    return p;
  };
  if (!validate(wrap(doc))) {
    for (const e of validate.errors) problems.push(`${name}: ${e.instancePath || "/"} ${e.keyword} ${JSON.stringify(e.params)}`);
  }
  const walk = (v, at) => {
    if (v === null || typeof v !== "object") return;
    if (Array.isArray(v)) { v.forEach((x, i) => walk(x, `${at}/${i}`)); return; }
    const read = seen.get(v);
    const checked = read && read.size > 0 && !listed.has(v);
    for (const k of Object.keys(v)) {
      if (checked && !read.has(k)) problems.push(`${name}: ${at}/${k} is not a field the schema knows`);
      walk(v[k], `${at}/${k}`);
    }
  };
  walk(doc, "");
  console.log(`checked ${name} against ${schema}`);
}
if (process.argv[3]) fs.writeFileSync(process.argv[3], JSON.stringify(docs));
for (const p of problems) console.error(p);
process.exit(problems.length === 0 && docs.length > 0 ? 0 : 1);
