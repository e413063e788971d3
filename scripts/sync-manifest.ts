// Writes the rule list into the extension manifest's `regwise.levels` schema so the editor completes rule ids;
// test/rules/parity.test.ts fails when the two drift apart. Run: npx tsx scripts/sync-manifest.ts
import * as fs from 'node:fs';
import * as path from 'node:path';
import { RULES } from '../rules/index';

const file = path.join(__dirname, '..', 'package.json');
const manifest = JSON.parse(fs.readFileSync(file, 'utf8'));
const levels = manifest.contributes.configuration.properties['regwise.levels'];
levels.properties = Object.fromEntries(
  [...RULES].sort((a, b) => (a.meta.id < b.meta.id ? -1 : 1)).map((r) => [
    r.meta.id,
    { type: 'string', enum: ['off', 'hint', 'info', 'warning', 'error'], description: `${r.meta.title} (default: ${r.meta.level}).` },
  ]),
);
delete levels.propertyNames;
levels.additionalProperties = false;
fs.writeFileSync(file, `${JSON.stringify(manifest, null, 2)}\n`);
console.error(`regwise.levels lists ${RULES.length} rules`);
