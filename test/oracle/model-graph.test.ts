// Reference check of the model graph: for every sample model class, the leaf layers PyTorch's named_modules() lists
// (names and types) and the direct feeds its forward hooks observe equal what `regwise model FILE --format json` says.
import { beforeAll, expect, test } from 'vitest';
import { main } from '../../server/src/cli/main';
import { TORCH, oracleSuite, runOracle } from './python';

/* eslint-disable @typescript-eslint/no-explicit-any */

interface Side {
  layers: string[];
  flow: string[];
}

/** Scalar constructor attributes both sides spell the same way (named_modules.py `attrs`, regwise `args`). */
const SCALAR_ARGS = ['in_channels', 'out_channels', 'groups', 'in_features', 'out_features', 'num_features', 'num_groups', 'num_channels',
  'momentum', 'eps', 'affine', 'track_running_stats', 'p', 'input_size', 'hidden_size', 'num_layers', 'dropout', 'bidirectional', 'batch_first', 'bias'];

/** `torch.nn.Conv2d` stays; a user class (`pollinator_cnn.legacy.SpatialDropBlock` / `SpatialDropBlock`) → its name. */
function typeKey(t: string): string {
  return t.startsWith('torch.nn.') ? t : t.slice(t.lastIndexOf('.') + 1);
}

async function regwiseModels(file: string): Promise<any[]> {
  let out = '';
  let err = '';
  const code = await main(['model', file, '--format', 'json'], { out: (s) => { out += s; }, err: (s) => { err += s; } });
  if (code !== 0) throw new Error(`regwise model ${file} exited ${code}: ${err}`);
  return JSON.parse(out).models;
}

// named_modules.py at collection time, so each class becomes its own test and a disagreement names its class
let oracle: any;
let oracleError: unknown;
try {
  oracle = runOracle('named_modules.py');
} catch (e) {
  oracleError = e;
}

oracleSuite('model graph oracle: named_modules() and forward hooks vs regwise model', [TORCH], () => {
  const engine = new Map<string, any[]>();

  beforeAll(async () => {
    if (oracleError) throw oracleError;
    for (const f of oracle.files as any[]) if (f.classes?.length) engine.set(f.path, await regwiseModels(f.path));
  }, 300_000);

  test('the oracle imported every sample file', () => {
    if (oracleError) throw oracleError;
    expect((oracle.files as any[]).filter((f) => f.error).map((f) => `${f.path}: ${f.error.message}`)).toEqual([]);
  });

  for (const c of (oracle?.classes ?? []) as any[]) {
    test(`${c.path}:${c.line} ${c.class}`, () => {
      const models = engine.get(c.path) ?? [];
      const m = models.find((x) => x.class === c.class);
      expect(m, `regwise model ${c.path} lists no class ${c.class}`).toBeDefined();
      expect(m.line).toBe(c.line);
      if (!c.layers) {
        // construction raised in PyTorch (a planted error): nothing to compare but the class itself
        expect(c.error?.stage).toBe('construct');
        return;
      }
      const want: Side = { layers: c.layers.map((l: any) => `${l.name} ${typeKey(l.type)}`), flow: [] };
      const got: Side = { layers: m.layers.map((l: any) => `${l.name} ${typeKey(l.type)}`), flow: [] };
      if (c.flow) {
        // the forward ran in PyTorch: compare feeds too (as sets: both record first-seen order, which may differ)
        want.flow = c.flow.map(([a, b]: string[]) => `${a} > ${b}`).sort();
        got.flow = (m.flow as string[][]).map(([a, b]) => `${a} > ${b}`).sort();
      }
      expect(got).toEqual(want);
      // constructor arguments the rules read, as the interpreter resolved them (tuples such as kernel_size differ in
      // spelling between the two sides and are left out)
      const wantArgs: string[] = [];
      const gotArgs: string[] = [];
      for (const l of c.layers as any[]) {
        const r = m.layers.find((x: any) => x.name === l.name);
        for (const k of SCALAR_ARGS) {
          if (!(k in l.attrs)) continue;
          wantArgs.push(`${l.name}.${k}=${JSON.stringify(l.attrs[k])}`);
          gotArgs.push(`${l.name}.${k}=${JSON.stringify(r?.args?.[k] ?? null)}`);
        }
      }
      if (c.layers.length) expect(wantArgs.length, 'no constructor arguments compared').toBeGreaterThan(0);
      expect(gotArgs).toEqual(wantArgs);
    });
  }
});
