// The server's document model: incremental changes keep text, line index and the reused tree equal to a fresh parse.
import { beforeAll, describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { loadPythonParser, type PythonParser } from '../../server/src/engine/parser';
import { LineIndex, PythonDocument, applyContentChanges } from '../../server/src/lsp/documents';
import { parseSettings } from '../../server/src/lsp/settings';
import manifest from '../../package.json';

let parser: PythonParser;
beforeAll(async () => {
  parser = await loadPythonParser();
});

const BASE = 'import torch.nn as nn\n\nclass Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = nn.Conv2d(3, 8, 3)  # «ünïcode» 🐝\n        self.bn = nn.BatchNorm2d(8)\n';

describe('LineIndex', () => {
  it('maps offsets and positions both ways in UTF-16 code units', () => {
    const idx = new LineIndex(BASE);
    const bee = BASE.indexOf('🐝');
    expect(idx.positionAt(bee)).toEqual({ line: 5, character: BASE.split('\n')[5].indexOf('🐝') });
    expect(idx.positionAt(bee + 2).character - idx.positionAt(bee).character).toBe(2);
    for (let o = 0; o <= BASE.length; o += 7) expect(idx.offsetAt(idx.positionAt(o))).toBe(o);
    // past the end of a line clamps to its end, past the last line to the text's end
    expect(idx.offsetAt({ line: 0, character: 999 })).toBe(BASE.indexOf('\n'));
    expect(idx.offsetAt({ line: 99, character: 0 })).toBe(BASE.length);
  });
});

describe('PythonDocument', () => {
  const edit = fc.record({ at: fc.nat(), len: fc.nat({ max: 6 }), text: fc.constantFrom('', ' ', 'x', '(', ')', '\n', '  ', 'nn.', '# c\n', '🐝', 'bias=False, ') });

  it('after any sequence of ranged changes, the text and the reused tree equal a fresh parse', () => {
    fc.assert(
      fc.property(fc.array(fc.array(edit, { minLength: 1, maxLength: 3 }), { minLength: 1, maxLength: 8 }), (batches) => {
        const doc = new PythonDocument('file:///t.py', 't.py', 1, BASE, parser);
        let expected = BASE;
        let v = 1;
        for (const batch of batches) {
          const changes = batch.map((e) => {
            // each change applies to the text left by the previous one, as the protocol says
            const idx = new LineIndex(expected);
            let start = e.at % (expected.length + 1);
            // never split a surrogate pair: editors do not
            if (start > 0 && /[\udc00-\udfff]/.test(expected[start] ?? '')) start--;
            let end = Math.min(expected.length, start + e.len);
            if (end > 0 && /[\udc00-\udfff]/.test(expected[end] ?? '')) end++;
            const change = { range: { start: idx.positionAt(start), end: idx.positionAt(end) }, text: e.text };
            expected = expected.slice(0, start) + e.text + expected.slice(end);
            return change;
          });
          doc.update(changes, ++v);
          expect(doc.text).toBe(expected);
          const fresh = parser.parse(expected);
          expect(doc.tree!.rootNode.toString()).toBe(fresh.rootNode.toString());
          fresh.delete();
        }
        expect(doc.version).toBe(v);
        // every update was ranged, so every reparse reused the edited tree
        expect(doc.incrementalParses).toBe(batches.length);
        expect(doc.lines.text).toBe(expected);
        doc.dispose();
      }),
      { numRuns: 60, seed: 6 },
    );
  });

  it('handles a whole-text change followed by ranged ones in one event', () => {
    const doc = new PythonDocument('file:///t.py', 't.py', 1, BASE, parser);
    doc.update([{ text: 'x = 1\n' }, { range: { start: { line: 0, character: 4 }, end: { line: 0, character: 5 } }, text: '2' }], 2);
    expect(doc.text).toBe('x = 2\n');
    expect(doc.incrementalParses).toBe(0);
    expect(doc.tree!.rootNode.toString()).toBe(parser.parse('x = 2\n').rootNode.toString());
    expect(applyContentChanges('ab\ncd', [{ range: { start: { line: 1, character: 1 }, end: { line: 1, character: 2 } }, text: 'X' }])).toBe('ab\ncX');
  });
});

describe('settings and the extension manifest', () => {
  const props = (manifest as unknown as { contributes: { configuration: { properties: Record<string, { default?: unknown; properties?: Record<string, unknown>; additionalProperties?: { enum?: string[] } }> } } }).contributes.configuration.properties;

  it('declares exactly the settings the server reads, with the level words the engine knows', () => {
    expect(Object.keys(props).sort()).toEqual(['regwise.enabled', 'regwise.levels', 'regwise.scanWorkspaceOnOpen', 'regwise.thresholds']);
    // each rule's level takes the words the server accepts (the parity test checks the rule list itself)
    const levels = props['regwise.levels'].properties as Record<string, { enum: string[] }>;
    expect(Object.keys(levels).length).toBeGreaterThan(0);
    for (const [rule, schema] of Object.entries(levels)) {
      expect(schema.enum, rule).toEqual(['off', 'hint', 'info', 'warning', 'error']);
      expect(parseSettings({ levels: { [rule]: 'hint' } }, [rule]).settings.engine.levels).toEqual({ [rule]: 'hint' });
    }
    const valid: Record<string, number> = { 'min-batch-per-device': 8, 'devices-per-process': 4, 'suspicious-drop-rate': 0.75 };
    expect(Object.keys(props['regwise.thresholds'].properties!).sort()).toEqual(Object.keys(valid).sort());
    const { settings, problems } = parseSettings({ thresholds: valid }, []);
    expect(problems).toEqual([]);
    expect(settings.engine.thresholds).toEqual({ minBatchPerDevice: 8, devicesPerProcess: 4, suspiciousDropRate: 0.75 });
    expect(parseSettings({ thresholds: { 'min-batch-per-device': 2.5, 'suspicious-drop-rate': 1 } }, []).problems).toHaveLength(2);
  });

  it('drops bad values with a message instead of failing', () => {
    const { settings, problems } = parseSettings({ enabled: 'yes', levels: { 'no-such-rule': 'error', 'bias-before-norm': 'loud' }, thresholds: { 'min-batch-per-device': -1, nope: 2 } }, ['bias-before-norm']);
    expect(settings.enabled).toBe(true);
    expect(settings.engine.levels).toEqual({});
    expect(settings.engine.thresholds).toEqual({});
    expect(problems).toHaveLength(5);
  });

  it('contributes the four commands and activates on Python files and notebooks', () => {
    const m = manifest as unknown as { contributes: { commands: { command: string; title: string; category: string }[] }; activationEvents: string[]; capabilities: { untrustedWorkspaces: { supported: boolean } } };
    expect(m.contributes.commands.map((c) => `${c.category}: ${c.title}`)).toEqual([
      'Regwise: Apply safe fixes in file',
      'Regwise: Scan workspace',
      'Regwise: Show model structure',
      'Regwise: Explain rule',
    ]);
    expect(m.activationEvents).toEqual(['onLanguage:python', 'onNotebook:jupyter-notebook']);
    expect(m.capabilities.untrustedWorkspaces.supported).toBe(true);
  });
});
