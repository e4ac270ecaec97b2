// A failure inside noisewise while building one file's semantic model (simulated here: the model throws for a marked
// file, as a stack overflow would) stays with that file: it gets one internal-error finding and a note, and the files
// that import it, and every other file, are checked as usual.
import * as path from 'node:path';
import { describe, expect, it, vi } from 'vitest';
import { checkSources } from '../../server/src/engine/check';
import { VIRTUAL_ROOT } from './engine-checks';
import { unconstrainedStdModule } from '../helpers/snippets';

const MARKER = 'MODEL_BREAKS_HERE';

vi.mock('../../server/src/semantic/module', async (importOriginal) => {
  const original = await importOriginal<typeof import('../../server/src/semantic/module')>();
  /** The real model, except that it fails on a text holding the marker. */
  class FailingModuleAnalysis extends original.ModuleAnalysis {
    constructor(...args: ConstructorParameters<typeof original.ModuleAnalysis>) {
      if (args[0].text.includes(MARKER)) throw new RangeError('Maximum call stack size exceeded');
      super(...args);
    }
  }
  return { ...original, ModuleAnalysis: FailingModuleAnalysis };
});

const LAYER = unconstrainedStdModule('GaugeLayer');

describe('a failure while building one file\'s model', () => {
  it('is contained to that file; the file importing it and the others are checked as usual', async () => {
    const files = {
      'gauges/broken.py': `# ${MARKER}\n${LAYER}`,
      'gauges/train.py': `from gauges.broken import GaugeLayer\n${LAYER.replace('GaugeLayer', 'OtherLayer')}\nlayer = GaugeLayer()\n`,
      'gauges/fine.py': LAYER,
    };
    const reports = await checkSources(
      Object.entries(files).map(([rel, text]) => ({ path: rel, absPath: path.join(VIRTUAL_ROOT, rel), text })),
      { workspaceRoot: VIRTUAL_ROOT, settingsFor: () => ({ severity: {}, datasetSizeNames: [] }) },
    );
    const [broken, train, fine] = reports;
    expect(broken!.findings.map((f) => [f.rule, f.severity, f.message])).toEqual([['internal-error', 'error', 'noisewise could not analyse this file: Maximum call stack size exceeded']]);
    expect(broken!.notes).toEqual([{ level: 'error', kind: 'internal', message: 'noisewise could not analyse this file: Maximum call stack size exceeded' }]);
    for (const report of [train!, fine!]) {
      expect(report.notes.filter((n) => n.kind === 'internal'), report.path).toEqual([]);
      expect(report.findings.map((f) => f.rule), report.path).toEqual(['unconstrained-std']);
    }
  });
});
