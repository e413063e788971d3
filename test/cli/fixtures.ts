// Small fixture files for the scanner tests: a notebook in nbformat's own layout, and scripts with known findings.
import { biasModel } from './helpers';

/** nbformat writes JSON with one-space indentation and sorted keys; sources are lists of lines. */
export function notebook(cells: { type: 'code' | 'markdown'; source: string }[], indent = 1): string {
  const lines = (s: string) => s.split(/(?<=\n)/).filter((l) => l !== '');
  const nb = {
    cells: cells.map((c) => (c.type === 'code'
      ? { cell_type: 'code', execution_count: null, metadata: {}, outputs: [], source: lines(c.source) }
      : { cell_type: 'markdown', metadata: {}, source: lines(c.source) })),
    metadata: { kernelspec: { display_name: 'Python 3', language: 'python', name: 'python3' }, language_info: { name: 'python' } },
    nbformat: 4,
    nbformat_minor: 5,
  };
  return `${JSON.stringify(nb, null, indent)}\n`;
}

export const NOTEBOOK_CELLS: { type: 'code' | 'markdown'; source: string }[] = [
  { type: 'markdown', source: '# Trap images\nA quick model — “é” and ünïcode stay as written.\n' },
  { type: 'code', source: '%matplotlib inline\nimport torch.nn as nn\n' },
  { type: 'code', source: biasModel('TrapNet').replace('import torch.nn as nn\n\n\n', '') },
];

export { biasModel };
