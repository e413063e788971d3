// Reference check of container idioms (cfg-list VGG, nn.Sequential/ModuleDict/ModuleList subclasses, names built
// with "%d" and f-strings, a lambda norm_layer): PyTorch's named_modules() and forward hooks vs `regwise model`.
import { beforeAll, expect, test } from 'vitest';
import { main } from '../../server/src/cli/main';
import { TORCH, oracleSuite, runOracle } from './python';

/* eslint-disable @typescript-eslint/no-explicit-any */

const FILE = 'test/oracle/idioms/container_idioms.py';
/** The classes that build with no arguments; the others are parts that need constructor arguments. */
const MODELS = ['VGGPlain', 'VGGBN', 'MobileNetish', 'DenseNetish', 'LambdaNorm', 'ListSubclass', 'SharedOutput', 'OldStyleInit', 'SetattrNames'];
const SCALAR_ARGS = ['in_channels', 'out_channels', 'groups', 'in_features', 'out_features', 'num_features', 'num_groups', 'num_channels', 'momentum', 'eps', 'affine', 'p', 'bias'];

const typeKey = (t: string) => (t.startsWith('torch.nn.') ? t : t.slice(t.lastIndexOf('.') + 1));

let oracle: any;
let oracleError: unknown;
try {
  oracle = runOracle('named_modules.py', [FILE]);
} catch (e) {
  oracleError = e;
}

oracleSuite('model graph oracle: container idioms', [TORCH], () => {
  let models: any[] = [];

  beforeAll(async () => {
    if (oracleError) throw oracleError;
    let out = '';
    let err = '';
    const code = await main(['model', FILE, '--format', 'json'], { out: (s) => { out += s; }, err: (s) => { err += s; } });
    if (code !== 0) throw new Error(`regwise model exited ${code}: ${err}`);
    models = JSON.parse(out).models;
  }, 120_000);

  for (const name of MODELS) {
    test(name, () => {
      if (oracleError) throw oracleError;
      const c = (oracle.classes as any[]).find((x) => x.class === name);
      expect(c?.error, `PyTorch could not run ${name}`).toBeUndefined();
      const m = models.find((x) => x.class === name);
      expect(m, `regwise model lists no class ${name}`).toBeDefined();
      const want = {
        layers: c.layers.map((l: any) => `${l.name} ${typeKey(l.type)}`),
        flow: c.flow.map(([a, b]: string[]) => `${a} > ${b}`).sort(),
      };
      const got = {
        layers: m.layers.map((l: any) => `${l.name} ${typeKey(l.type)}`),
        flow: (m.flow as string[][]).map(([a, b]) => `${a} > ${b}`).sort(),
      };
      expect(got).toEqual(want);
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
      expect(wantArgs.length, 'no constructor arguments compared').toBeGreaterThan(0);
      expect(gotArgs).toEqual(wantArgs);
    });
  }
});
