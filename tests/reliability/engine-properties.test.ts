// Property tests of the engine on every fixture, mutated the way half-written and badly transferred files are: no
// failure escapes and no rule fails, findings stay inside the document, and the output is deterministic (the same
// input gives the same findings in the same order, whichever order the workspace's files are checked in).
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { checkInOrder, expectSane, fingerprint, type MemoryFile } from './engine-checks';
import { allFixtures, recordCount, runs, seed } from './fixtures';
import { applyMutations, mutateNotebook, mutatedInput, type MutatedInput } from './mutations';

const fixtures = allFixtures();

/** The workspace of a mutated input: the fixture's files, one of them mutated. */
function mutatedFiles(input: MutatedInput): { files: MemoryFile[]; label: string } {
  const fixture = fixtures[input.fixture]!;
  const target = input.file % fixture.files.length;
  const files = fixture.files.map((f, i) => {
    if (i !== target) return { rel: f.rel, text: f.text };
    const text = f.rel.endsWith('.ipynb') ? mutateNotebook(f.text, input.mutations, input.notebookCell) : applyMutations(f.text, input.mutations);
    return { rel: f.rel, text };
  });
  return { files, label: `${fixture.label} (${fixture.files[target]!.rel}) ${JSON.stringify(input.mutations)}` };
}

describe('the engine on mutated fixtures', () => {
  it(`has fixtures to mutate (${fixtures.length} workspaces)`, () => {
    expect(fixtures.length).toBeGreaterThan(50);
  });

  it('checks every fixture as it is without failing and with every range inside its document', async () => {
    for (const fixture of fixtures) {
      const order = fixture.files.map((_, i) => i);
      expectSane(await checkInOrder(fixture.files, order), fixture.label);
    }
    recordCount('engine: fixtures checked unmutated', fixtures.length);
  });

  it('never fails, keeps findings inside the document and answers the same in any file order', async () => {
    let tried = 0;
    await fc.assert(
      fc.asyncProperty(mutatedInput(fixtures.length), async (input) => {
        const { files, label } = mutatedFiles(input);
        const order = files.map((_, i) => i);
        const first = await checkInOrder(files, order);
        expectSane(first, label);
        // A fresh workspace, the files checked in the opposite order: the same findings in the same order.
        const second = await checkInOrder(files, [...order].reverse());
        expect(fingerprint(second), label).toBe(fingerprint(first));
        tried++;
      }),
      { numRuns: runs(250, 8000), seed: seed(), endOnFailure: true },
    );
    recordCount('engine: mutated inputs checked twice', tried);
  }, 600_000);
});
