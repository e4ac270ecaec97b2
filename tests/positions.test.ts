// Pins the column units of every position conversion: offsets (UTF-16) to LSP, CLI (code points) and UTF-8 bytes, and back.
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { byteToUtf16Offset, codePointsBetween, LineIndex, utf16ToByteOffset } from '../server/src/parse/positions';
import { firstAtLeast } from '../server/src/parse/sorted';

describe('LineIndex on ASCII text', () => {
  const text = 'import torch\nsigma = 0.1\n';
  const index = new LineIndex(text);

  it('finds line starts and counts the empty last line', () => {
    expect(index.lineStarts).toEqual([0, 13, 25]);
    expect(index.lineCount).toBe(3);
  });

  it('converts offsets to LSP and CLI positions', () => {
    const offset = text.indexOf('0.1');
    expect(index.toLsp(offset)).toEqual({ line: 1, character: 8 });
    expect(index.toCli(offset)).toEqual({ line: 2, column: 9 });
    expect(index.toCli(0)).toEqual({ line: 1, column: 1 });
    expect(index.toCli(text.length)).toEqual({ line: 3, column: 1 });
  });

  it('converts positions back to offsets', () => {
    expect(index.fromLsp({ line: 1, character: 8 })).toBe(text.indexOf('0.1'));
    expect(index.fromCli({ line: 2, column: 9 })).toBe(text.indexOf('0.1'));
  });

  it('clamps out-of-range input', () => {
    expect(index.toLsp(-5)).toEqual({ line: 0, character: 0 });
    expect(index.toLsp(1000)).toEqual({ line: 2, character: 0 });
    expect(index.fromLsp({ line: 0, character: 99 })).toBe(12);
    expect(index.fromLsp({ line: 9, character: 0 })).toBe(text.length);
    expect(index.fromLsp({ line: -1, character: 3 })).toBe(0);
    expect(index.fromCli({ line: 1, column: 99 })).toBe(12);
    expect(index.fromCli({ line: 0, column: 4 })).toBe(0);
  });
});

describe('non-ASCII columns', () => {
  it('counts é as one column, one UTF-16 unit and two UTF-8 bytes', () => {
    const text = 'débit = 3';
    const index = new LineIndex(text);
    const offset = text.indexOf('=');
    expect(offset).toBe(6);
    expect(index.toLsp(offset)).toEqual({ line: 0, character: 6 });
    expect(index.toCli(offset)).toEqual({ line: 1, column: 7 });
    expect(utf16ToByteOffset(text, offset)).toBe(7);
    expect(byteToUtf16Offset(text, 7)).toBe(6);
  });

  it('counts a CJK character as one column, one UTF-16 unit and three UTF-8 bytes', () => {
    const text = '水位 = h';
    const index = new LineIndex(text);
    const offset = text.indexOf('h');
    expect(index.toLsp(offset)).toEqual({ line: 0, character: 5 });
    expect(index.toCli(offset)).toEqual({ line: 1, column: 6 });
    expect(utf16ToByteOffset(text, offset)).toBe(9);
    expect(byteToUtf16Offset(text, 9)).toBe(offset);
    expect(index.fromCli({ line: 1, column: 6 })).toBe(offset);
  });

  it('counts an emoji outside the BMP as one column, two UTF-16 units and four UTF-8 bytes', () => {
    const text = 's = "😀"; t = 1';
    const index = new LineIndex(text);
    const offset = text.indexOf('t');
    expect(offset).toBe(10);
    expect(index.toLsp(offset)).toEqual({ line: 0, character: 10 });
    expect(index.toCli(offset)).toEqual({ line: 1, column: 10 });
    expect(index.fromCli({ line: 1, column: 10 })).toBe(offset);
    expect(utf16ToByteOffset(text, offset)).toBe(12);
    expect(byteToUtf16Offset(text, 12)).toBe(offset);
    expect(codePointsBetween(text, 0, text.length)).toBe(14);
  });

  it('maps a byte offset inside a multi-byte character to that character', () => {
    const text = 'a😀b';
    expect(byteToUtf16Offset(text, 2)).toBe(1);
    expect(byteToUtf16Offset(text, 5)).toBe(3);
    expect(byteToUtf16Offset(text, 99)).toBe(text.length);
  });

  it('steps over a whole surrogate pair when converting a CLI column back', () => {
    const text = '😀😀x';
    const index = new LineIndex(text);
    expect(index.fromCli({ line: 1, column: 2 })).toBe(2);
    expect(index.fromCli({ line: 1, column: 3 })).toBe(4);
  });
});

describe('line breaks', () => {
  it('treats CRLF as one break and keeps CR out of line ends', () => {
    const text = 'a = 1\r\nb = 2\r\n';
    const index = new LineIndex(text);
    expect(index.lineStarts).toEqual([0, 7, 14]);
    expect(index.lineEnd(0)).toBe(5);
    expect(index.toCli(text.indexOf('b'))).toEqual({ line: 2, column: 1 });
    expect(index.fromLsp({ line: 0, character: 10 })).toBe(5);
  });

  it('accepts a lone CR as a line break', () => {
    const index = new LineIndex('a\rb');
    expect(index.lineStarts).toEqual([0, 2]);
    expect(index.toLsp(2)).toEqual({ line: 1, character: 0 });
  });

  it('handles the empty text', () => {
    const index = new LineIndex('');
    expect(index.lineCount).toBe(1);
    expect(index.toLsp(0)).toEqual({ line: 0, character: 0 });
    expect(index.toCli(0)).toEqual({ line: 1, column: 1 });
    expect(index.fromCli({ line: 3, column: 3 })).toBe(0);
    expect(utf16ToByteOffset('', 0)).toBe(0);
    expect(byteToUtf16Offset('', 4)).toBe(0);
  });
});

describe('round trips on generated text', () => {
  const alphabet = fc.constantFrom('a', ' ', 'é', '水', '😀', '\n', '\r\n', '\t');
  const texts = fc.array(alphabet, { maxLength: 60 }).map((parts) => parts.join(''));

  it('LSP and CLI positions convert back to the same offset at every character boundary', () => {
    fc.assert(
      fc.property(texts, (text) => {
        const index = new LineIndex(text);
        for (let offset = 0; offset <= text.length; offset++) {
          const c = text.charCodeAt(offset);
          const insidePair = c >= 0xdc00 && c <= 0xdfff;
          const beforeLf = c === 10 && text.charCodeAt(offset - 1) === 13;
          if (insidePair || beforeLf) continue;
          expect(index.fromLsp(index.toLsp(offset))).toBe(offset);
          expect(index.fromCli(index.toCli(offset))).toBe(offset);
          expect(byteToUtf16Offset(text, utf16ToByteOffset(text, offset))).toBe(offset);
        }
      }),
    );
  });

  it('byte offsets agree with Buffer.byteLength', () => {
    fc.assert(
      fc.property(texts, (text) => {
        expect(utf16ToByteOffset(text, text.length)).toBe(Buffer.byteLength(text, 'utf8'));
      }),
    );
  });
});

describe('LineIndex.of', () => {
  it('shares one index per text among recent texts and indexes any other text afresh', () => {
    const a = 'x = 1\ny = 2\n';
    const b = 'x = 1\n\ny = 2\n';
    const first = LineIndex.of(a);
    // The same text, even as another string object, gets the same index.
    expect(LineIndex.of(`x = 1\n${'y = 2\n'}`)).toBe(first);
    expect(LineIndex.of(b)).not.toBe(first);
    expect(LineIndex.of(b).lineStarts).toEqual(new LineIndex(b).lineStarts);
    // After more texts than it keeps, the oldest is indexed again (and still right).
    for (let i = 0; i < 8; i++) LineIndex.of(`z = ${i}\n`);
    const again = LineIndex.of(a);
    expect(again).not.toBe(first);
    expect(again.lineStarts).toEqual(first.lineStarts);
  });
});

describe('firstAtLeast', () => {
  it('finds the first position whose value is at least the one asked for', () => {
    fc.assert(
      fc.property(fc.array(fc.integer({ min: -50, max: 50 })), fc.integer({ min: -60, max: 60 }), (values, x) => {
        const sorted = [...values].sort((p, q) => p - q);
        const expected = sorted.findIndex((v) => v >= x);
        expect(firstAtLeast(sorted, x)).toBe(expected === -1 ? sorted.length : expected);
        expect(firstAtLeast(Int32Array.from(sorted), x)).toBe(expected === -1 ? sorted.length : expected);
      }),
    );
  });
});
