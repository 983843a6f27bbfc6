// Prints the character-table exceptions of src/text/normalize.ts (the LEGACY_* ranges).
//
//   npx tsx tests/text/probe-reference-unicode.ts
//
// The reference, the `tokenizers` npm package 0.23.2, classifies characters with Unicode
// tables older than the ones JavaScript's `\p{…}` uses here (its punctuation table lacks
// U+2E4F, added in Unicode 13; unassigned code points count as letters). To give the same
// tokens as models built with it, normalize.ts follows its tables: this script asks the
// reference about every code point, one at a time, and prints where its answer differs
// from what the JavaScript Unicode properties say.
import { bertNormalizer, bertPreTokenizer } from 'tokenizers';

const clean = bertNormalizer({ cleanText: true, handleChineseChars: false, stripAccents: false, lowercase: false });
const strip = bertNormalizer({ cleanText: false, handleChineseChars: false, stripAccents: true, lowercase: false });
const pre = bertPreTokenizer();

const OTHER = /^[\p{Cc}\p{Cf}\p{Cs}\p{Co}]$/u;
const MN = /^\p{Mn}$/u;
const PUNCT = /^\p{P}$/u;
const asciiPunct = (cp: number) =>
  (cp >= 0x21 && cp <= 0x2f) || (cp >= 0x3a && cp <= 0x40) || (cp >= 0x5b && cp <= 0x60) || (cp >= 0x7b && cp <= 0x7e);

const lists: Record<string, number[]> = { NOT_OTHER: [], OTHER: [], NOT_MN: [], MN: [], NOT_DECOMPOSED: [], NOT_PUNCT: [], PUNCT: [] };
for (let cp = 0; cp < 0x110000; cp++) {
  if (cp >= 0xd800 && cp <= 0xdfff) continue;
  const ch = String.fromCodePoint(cp);
  if (cp === 0 || cp === 0xfffd || cp === 9 || cp === 10 || cp === 13) continue;
  const refOther = clean.normalizeString(`x${ch}`) === 'x';
  if (refOther !== OTHER.test(ch)) lists[refOther ? 'OTHER' : 'NOT_OTHER']!.push(cp);
  const refStripped = strip.normalizeString(`x${ch}`);
  let whole = ch.normalize('NFD') === ch;
  if (!whole && refStripped === `x${ch}`) {
    // Unicode gave it a canonical decomposition after the library's tables were made
    lists.NOT_DECOMPOSED!.push(cp);
    whole = true;
  }
  if (whole) {
    const refMn = refStripped === 'x';
    if (refMn !== MN.test(ch)) lists[refMn ? 'MN' : 'NOT_MN']!.push(cp);
  }
  const words = pre.preTokenizeString(`x${ch}x`).length;
  if (words !== 2) {
    const refPunct = words === 3;
    if (refPunct !== (asciiPunct(cp) || PUNCT.test(ch))) lists[refPunct ? 'PUNCT' : 'NOT_PUNCT']!.push(cp);
  }
}

const hex = (n: number) => `0x${n.toString(16)}`;
for (const [name, cps] of Object.entries(lists)) {
  const ranges: string[] = [];
  for (let i = 0; i < cps.length;) {
    let j = i;
    while (j + 1 < cps.length && cps[j + 1] === cps[j]! + 1) j++;
    ranges.push(`${hex(cps[i]!)}, ${hex(cps[j]!)}`);
    i = j + 1;
  }
  const lines: string[] = [];
  for (const r of ranges) {
    if (lines.length === 0 || lines[lines.length - 1]!.length + r.length > 90) lines.push(r);
    else lines[lines.length - 1] += `, ${r}`;
  }
  const body = lines.map((l) => `  ${l},\n`).join('');
  process.stdout.write(`const LEGACY_${name}: readonly number[] = [${body ? `\n${body}` : ''}];\n`);
}
