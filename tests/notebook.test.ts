// Notebook reading (virtual module, magics, cell map, broken files) and writing fixes back into cells without disturbing the rest of the file.
import { describe, expect, it } from 'vitest';
import { applyNotebookEdits, cellLineIndex, locateInNotebook, NotebookError, neutraliseMagics, readNotebook, splitSourceLines } from '../server/src/parse/notebook';

/** A notebook file as nbformat writes it: one-space indent, list sources, trailing newline. */
function notebookText(cells: { type: 'code' | 'markdown' | 'raw'; source: string | string[] }[], extra: Record<string, unknown> = {}): string {
  const doc = {
    cells: cells.map((c, i) =>
      c.type === 'code'
        ? { cell_type: 'code', execution_count: i, id: `c${i}`, metadata: {}, outputs: [], source: c.source }
        : { cell_type: c.type, id: `c${i}`, metadata: {}, source: c.source },
    ),
    metadata: { kernelspec: { display_name: 'Python 3', language: 'python', name: 'python3' }, language_info: { name: 'python' } },
    nbformat: 4,
    nbformat_minor: 5,
    ...extra,
  };
  return `${JSON.stringify(doc, null, 1)}\n`;
}

describe('readNotebook', () => {
  const raw = notebookText([
    { type: 'markdown', source: ['# Pump bearing vibration\n', 'MC dropout at test time.'] },
    { type: 'code', source: ['import torch\n', 'x = torch.ones(3)\n'] },
    { type: 'raw', source: 'not python' },
    { type: 'code', source: 'y = x * 2' },
  ]);
  const model = readNotebook(raw);

  it('keeps code cells in order and counts markdown and raw cells in the index', () => {
    expect(model.cells.map((c) => c.index)).toEqual([1, 3]);
    expect(model.cells[0]!.source).toBe('import torch\nx = torch.ones(3)\n');
    expect(model.cells[1]!.source).toBe('y = x * 2');
    expect(model.cells.map((c) => c.sourceIsList)).toEqual([true, false]);
  });

  it('joins the code cells into one virtual module with one newline after each', () => {
    expect(model.text).toBe('import torch\nx = torch.ones(3)\n\ny = x * 2\n');
    expect(model.cells[1]!.start).toBe(model.text.indexOf('y = x'));
  });

  it('maps module offsets back to the cell and the offset inside it', () => {
    const offset = model.text.indexOf('* 2');
    const at = locateInNotebook(model, offset);
    expect(at.cell.index).toBe(3);
    expect(at.offset).toBe('y = x '.length);
    expect(cellLineIndex(at.cell).toCli(at.offset)).toEqual({ line: 1, column: 7 });
    const inFirst = locateInNotebook(model, model.text.indexOf('torch.ones'));
    expect(inFirst.cell.index).toBe(1);
    expect(cellLineIndex(inFirst.cell).toCli(inFirst.offset)).toEqual({ line: 2, column: 5 });
  });

  it('records the indent and the trailing newline of the file', () => {
    expect(model.indent).toBe(' ');
    expect(model.trailingNewline).toBe(true);
  });

  it('reads a notebook that starts with a byte-order mark', () => {
    expect(readNotebook(`\ufeff${raw}`).text).toBe(model.text);
  });

  it('reads a code cell with no source field as an empty cell', () => {
    const doc = JSON.parse(raw);
    delete doc.cells[3].source;
    const m = readNotebook(JSON.stringify(doc));
    expect(m.cells[1]!.source).toBe('');
  });
});

describe('IPython magics keep every offset', () => {
  const cases: [string, string, string][] = [
    ['line magic', '%matplotlib inline\nimport torch\n', '#matplotlib inline\nimport torch\n'],
    ['shell line', '!pip install pyro-ppl\nimport pyro\n', '#pip install pyro-ppl\nimport pyro\n'],
    ['assignment from a shell line', 'files = !ls data\nprint(files)\n', '#iles = !ls data\nprint(files)\n'],
    ['help query', 'model?\nmodel.eval()\n', '#odel?\nmodel.eval()\n'],
    ['double help query', 'torch.nn.Dropout??\n', '#orch.nn.Dropout??\n'],
    ['indented magic', 'for i in range(2):\n    %time f(i)\n', 'for i in range(2):\n    #time f(i)\n'],
  ];
  for (const [name, source, expected] of cases) {
    it(name, () => {
      const out = neutraliseMagics(source);
      expect(out).toBe(expected);
      expect(out.length).toBe(source.length);
    });
  }

  it('comments out a whole %%bash cell', () => {
    const source = '%%bash\nls -la\necho done\n';
    expect(neutraliseMagics(source)).toBe('#%bash\n#s -la\n#cho done\n');
  });

  it('comments out only the first line of a %%time cell, whose body is Python', () => {
    const source = '%%time\nfor epoch in range(3):\n    train(epoch)\n';
    expect(neutraliseMagics(source)).toBe('#%time\nfor epoch in range(3):\n    train(epoch)\n');
  });

  it('leaves Python with % and ? inside expressions alone', () => {
    const source = 'rate = 10 % 3\nprint("why?")\n';
    expect(neutraliseMagics(source)).toBe(source);
  });

  it('keeps cell offsets of a notebook with magics equal to the raw sources', () => {
    const raw = notebookText([
      { type: 'code', source: ['%matplotlib inline\n', 'import torch'] },
      { type: 'code', source: ['%%time\n', 'sigma = torch.ones(2)\n'] },
    ]);
    const m = readNotebook(raw);
    expect(m.text).toBe('#matplotlib inline\nimport torch\n#%time\nsigma = torch.ones(2)\n\n');
    const offset = m.text.indexOf('sigma');
    const at = locateInNotebook(m, offset);
    expect(at.cell.source.slice(at.offset, at.offset + 5)).toBe('sigma');
  });
});

describe('broken notebooks', () => {
  it('rejects text that is not JSON', () => {
    expect(() => readNotebook('{"cells": [')).toThrow(NotebookError);
    expect(() => readNotebook('{"cells": [')).toThrow(/not valid JSON/);
  });

  it('rejects a top level that is not an object', () => {
    expect(() => readNotebook('[1, 2]')).toThrow(/top level is not a JSON object/);
  });

  it('rejects missing or wrongly typed cells and sources', () => {
    expect(() => readNotebook('{"nbformat": 4, "cells": {}}')).toThrow(/"cells" is missing or is not a list/);
    expect(() => readNotebook('{"nbformat": 4}')).toThrow(NotebookError);
    expect(() => readNotebook('{"nbformat": 4, "cells": [3]}')).toThrow(/cell 0 is not an object/);
    expect(() => readNotebook('{"nbformat": 4, "cells": [{"cell_type": "code", "source": 7}]}')).toThrow(/cell 0 has a "source"/);
    expect(() => readNotebook('{"nbformat": 4, "cells": [{"cell_type": "code", "source": ["a", 1]}]}')).toThrow(NotebookError);
  });

  it('rejects nbformat 3', () => {
    expect(() => readNotebook('{"nbformat": 3, "nbformat_minor": 0, "worksheets": []}')).toThrow(/unsupported notebook format 3/);
  });

  it('rejects a notebook of another language', () => {
    const raw = notebookText([{ type: 'code', source: 'x <- 1' }], { metadata: { language_info: { name: 'R' } } });
    expect(() => readNotebook(raw)).toThrow(/language is r/);
  });
});

describe('applyNotebookEdits', () => {
  const raw = notebookText([
    { type: 'markdown', source: ['Soil moisture drift\n'] },
    { type: 'code', source: ['import torch\n', 'sigma = torch.ones(2)\n', 'noise = sigma * torch.randn(2)\n'] },
    { type: 'code', source: 'print(sigma)' },
    { type: 'code', source: ['scale = 0.5\n', 'z = scale * 2'] },
  ]);

  it('changes only the edited cell and keeps key order, indent and trailing newline', () => {
    const model = readNotebook(raw);
    const start = model.text.indexOf('sigma *');
    const out = applyNotebookEdits(model, [{ start, end: start + 'sigma'.length, newText: 'sigma.exp()' }]);
    const before = JSON.parse(raw);
    const after = JSON.parse(out);
    expect(after.cells[1].source).toEqual(['import torch\n', 'sigma = torch.ones(2)\n', 'noise = sigma.exp() * torch.randn(2)\n']);
    for (const i of [0, 2, 3]) expect(JSON.stringify(after.cells[i])).toBe(JSON.stringify(before.cells[i]));
    expect(Object.keys(after)).toEqual(Object.keys(before));
    expect(Object.keys(after.cells[1])).toEqual(Object.keys(before.cells[1]));
    expect(out.endsWith('}\n')).toBe(true);
    expect(out.split('\n')[1]).toMatch(/^ "cells": \[$/);
    const changedLines = out.split('\n').filter((line, i) => line !== raw.split('\n')[i]);
    expect(changedLines).toEqual(['    "noise = sigma.exp() * torch.randn(2)\\n"']);
  });

  it('writes a string source back as a string and a list source as a list', () => {
    const model = readNotebook(raw);
    const inString = model.text.indexOf('print(sigma)') + 'print('.length;
    const inList = model.text.indexOf('scale * 2');
    const out = applyNotebookEdits(model, [
      { start: inString, end: inString + 5, newText: 'sigma.exp()' },
      { start: inList, end: inList + 5, newText: 'scale\nz2 = scale' },
    ]);
    const after = JSON.parse(out);
    expect(after.cells[2].source).toBe('print(sigma.exp())');
    expect(after.cells[3].source).toEqual(['scale = 0.5\n', 'z = scale\n', 'z2 = scale * 2']);
  });

  it('applies several edits in one cell from the end so offsets stay valid', () => {
    const model = readNotebook(raw);
    const a = model.text.indexOf('sigma = torch');
    const b = model.text.indexOf('sigma *');
    const out = applyNotebookEdits(model, [
      { start: a, end: a + 5, newText: 'log_sigma' },
      { start: b, end: b + 5, newText: 'log_sigma.exp()' },
    ]);
    expect(JSON.parse(out).cells[1].source).toEqual(['import torch\n', 'log_sigma = torch.ones(2)\n', 'noise = log_sigma.exp() * torch.randn(2)\n']);
  });

  it('keeps a file without trailing newline and with two-space indent that way', () => {
    const doc = JSON.parse(raw);
    const compact = JSON.stringify(doc, null, 2);
    const model = readNotebook(compact);
    const start = model.text.indexOf('0.5');
    const out = applyNotebookEdits(model, [{ start, end: start + 3, newText: '0.25' }]);
    expect(out.endsWith('\n')).toBe(false);
    expect(out).toBe(compact.replace('"scale = 0.5\\n"', '"scale = 0.25\\n"'));
  });

  it('refuses an edit that spans two cells', () => {
    const model = readNotebook(raw);
    const start = model.text.indexOf('torch.randn(2)');
    const end = model.text.indexOf('print(sigma)') + 3;
    expect(() => applyNotebookEdits(model, [{ start, end, newText: '' }])).toThrow(/span two notebook cells/);
  });

  it('splits sources the way nbformat stores them', () => {
    expect(splitSourceLines('')).toEqual([]);
    expect(splitSourceLines('a\nb')).toEqual(['a\n', 'b']);
    expect(splitSourceLines('a\n')).toEqual(['a\n']);
  });
});
