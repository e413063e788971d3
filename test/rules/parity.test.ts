// Parity in both directions: the rule registry, the catalogue, rule pages, rule tests, the editor's settings schema
// and the scanner's config schema all name the same rules and thresholds.
import { describe, expect, test } from 'vitest';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { RULES } from '../../rules/index';
import { LEVELS } from '../../server/src/engine/types';
import { loadConfig } from '../../server/src/cli/config';

const root = path.join(__dirname, '..', '..');
const manifest = JSON.parse(fs.readFileSync(path.join(root, 'package.json'), 'utf8'));
const ids = RULES.map((r) => r.meta.id);

/** The catalogue's decided rule ids (sections A, B and C of the rule catalogue). */
const CATALOGUE = [
  'bias-before-norm', 'selu-plain-dropout', 'alpha-dropout-without-selu', 'selu-init', 'selu-with-batchnorm',
  'dropout-feeds-batchnorm', 'functional-dropout-always-on', 'functional-alpha-dropout-never-on', 'drop-rate-range',
  'rnn-dropout-one-layer', 'norm-momentum-convention', 'norm-channel-mismatch', 'groupnorm-divisibility',
  'hand-rolled-dropout',
  'eval-mode-missing', 'train-mode-not-restored', 'mode-switch-not-called', 'frozen-norm-still-updating',
  'batchnorm-tiny-batch', 'batchnorm-unsynced-ddp', 'adam-coupled-weight-decay', 'decay-on-norm-and-bias',
  'norm-fit-before-split', 'norm-refit-on-holdout', 'scaled-before-cv', 'eval-transform-mismatch', 'augment-on-eval-data',
];

describe('registry', () => {
  test('ids are unique, kebab-case and exactly the catalogue', () => {
    expect(new Set(ids).size).toBe(ids.length);
    for (const id of ids) expect(id).toMatch(/^[a-z0-9]+(-[a-z0-9]+)*$/);
    expect([...ids].sort()).toEqual([...CATALOGUE].sort());
  });

  test('each rule has its page, its table test and complete metadata', () => {
    for (const r of RULES) {
      expect(fs.existsSync(path.join(root, 'rules', `${r.meta.id}.ts`)), `${r.meta.id}.ts`).toBe(true);
      expect(fs.existsSync(path.join(root, 'rules', `${r.meta.id}.md`)), `${r.meta.id}.md`).toBe(true);
      expect(fs.existsSync(path.join(root, 'test', 'rules', `${r.meta.id}.test.ts`)), `${r.meta.id}.test.ts`).toBe(true);
      expect(LEVELS).toContain(r.meta.level);
      expect(['safe', 'suggested', 'none']).toContain(r.meta.fix);
      expect(['model', 'training', 'data']).toContain(r.meta.family);
      expect(r.meta.sources.length, `${r.meta.id} names its sources`).toBeGreaterThan(0);
      expect(Object.keys(r.meta.messages).length).toBeGreaterThan(0);
    }
  });

  test('every rule file in rules/ is registered (no orphans)', () => {
    const files = fs.readdirSync(path.join(root, 'rules')).filter((f) => f.endsWith('.md')).map((f) => f.slice(0, -3));
    expect(files.sort()).toEqual([...ids].sort());
  });
});

describe('editor settings schema', () => {
  const props = manifest.contributes.configuration.properties;

  test('regwise.levels offers exactly the registered rules with the level words', () => {
    const levels = props['regwise.levels'];
    expect(Object.keys(levels.properties).sort()).toEqual([...ids].sort());
    for (const id of ids) expect(levels.properties[id].enum).toEqual(['off', 'hint', 'info', 'warning', 'error']);
    expect(levels.additionalProperties).toBe(false);
  });

  test('the decided settings and commands exist', () => {
    expect(Object.keys(props).sort()).toEqual(['regwise.enabled', 'regwise.levels', 'regwise.scanWorkspaceOnOpen', 'regwise.thresholds']);
    const titles = manifest.contributes.commands.map((c: { category: string; title: string }) => `${c.category}: ${c.title}`).sort();
    expect(titles).toEqual(['Regwise: Apply safe fixes in file', 'Regwise: Explain rule', 'Regwise: Scan workspace', 'Regwise: Show model structure']);
  });

  test('regwise.thresholds and the config file accept the same keys', () => {
    const keys = Object.keys(props['regwise.thresholds'].properties).sort();
    expect(keys).toEqual(['devices-per-process', 'min-batch-per-device', 'suspicious-drop-rate']);
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'regwise-parity-'));
    const file = path.join(dir, 'regwise.toml');
    fs.writeFileSync(file, `[thresholds]\n"min-batch-per-device" = 8\n"devices-per-process" = 2\n"suspicious-drop-rate" = 0.7\n`);
    const cfg = loadConfig(file, ids);
    expect(cfg.thresholds).toEqual({ minBatchPerDevice: 8, devicesPerProcess: 2, suspiciousDropRate: 0.7 });
    fs.writeFileSync(file, `[thresholds]\n"min-batch-per-gpu" = 8\n`);
    expect(() => loadConfig(file, ids)).toThrow(/min-batch-per-device/);
  });
});

describe('config schema', () => {
  test('[levels] accepts every registered rule and rejects others with the nearest id', () => {
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'regwise-parity-'));
    const file = path.join(dir, 'regwise.toml');
    fs.writeFileSync(file, `[levels]\n${ids.map((id, i) => `${id} = "${['off', 'hint', 'info', 'warning', 'error'][i % 5]}"`).join('\n')}\n`);
    expect(Object.keys(loadConfig(file, ids).levels).sort()).toEqual([...ids].sort());
    fs.writeFileSync(file, `[levels]\nbias-before-norms = "off"\n`);
    expect(() => loadConfig(file, ids)).toThrow(/bias-before-norm\b/);
  });
});
