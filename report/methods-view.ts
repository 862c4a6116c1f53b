/**
 * The methods page: docs/methods.md turned into blocks a template can print escaped. A small
 * reader for the Markdown the document uses (headings, paragraphs, "- " lists, pipe tables,
 * indented formula blocks, `code`, [links](…), *emphasis*), not a general Markdown renderer:
 * no package for it is installed, and the document is ours. Numbered headings get the anchors
 * that "§x.y" links point to (report/methods-references.ts).
 */
import { linkMethodsReferences, sectionAnchor } from './methods-references.js';
import type { PageViewBase } from './page-common.js';

/** A run of text: plain, code, or a link. */
export interface MethodsTextPart {
  text: string;
  href: string | null;
  isCode: boolean;
}

export type MethodsBlock =
  | { kind: 'heading'; level: number; id: string; parts: MethodsTextPart[] }
  | { kind: 'paragraph'; parts: MethodsTextPart[] }
  | { kind: 'list'; items: MethodsTextPart[][] }
  | { kind: 'pre'; text: string }
  | { kind: 'table'; header: MethodsTextPart[][]; rows: MethodsTextPart[][][] };

export interface MethodsView extends PageViewBase {
  /** Chapters ("## " headings) for the contents list. */
  contents: { text: string; href: string }[];
  blocks: MethodsBlock[];
}

const LINK = /\[([^\]]+)\]\(([^)\s]+)\)/g;

/** *x* and **x** shown as plain text: the page has no use for emphasis. */
function withoutEmphasis(text: string): string {
  return text.replace(/\*\*([^*]+)\*\*/g, '$1').replace(/\*([^*\s][^*]*)\*/g, '$1');
}

function textParts(text: string): MethodsTextPart[] {
  return linkMethodsReferences(withoutEmphasis(text)).map((part) => ({ ...part, isCode: false }));
}

/**
 * Inline Markdown → parts. Links to other files of the repository (relative paths) are shown as
 * their text with the path, since the service serves only this document.
 */
export function inlineParts(text: string): MethodsTextPart[] {
  const parts: MethodsTextPart[] = [];
  text.split('`').forEach((segment, i) => {
    if (i % 2 === 1) {
      parts.push({ text: segment, href: null, isCode: true });
      return;
    }
    let at = 0;
    for (const match of segment.matchAll(LINK)) {
      const index = match.index ?? 0;
      parts.push(...textParts(segment.slice(at, index)));
      const [, label, target] = match;
      if (/^(https?:|\/|#)/.test(target)) parts.push({ text: label, href: target, isCode: false });
      else parts.push({ text: `${label} (${target})`, href: null, isCode: false });
      at = index + match[0].length;
    }
    parts.push(...textParts(segment.slice(at)));
  });
  return parts.filter((part) => part.text.length > 0);
}

function headingId(text: string): string {
  const numbered = /^(\d+(?:\.\d+)*[a-z]?)\.?\s/.exec(text);
  if (numbered) return sectionAnchor(numbered[1]);
  return text
    .toLowerCase()
    .replace(/[^a-z0-9]+/g, '-')
    .replace(/^-|-$/g, '');
}

function tableCells(line: string): string[] {
  return line
    .trim()
    .replace(/^\||\|$/g, '')
    .split('|')
    .map((cell) => cell.trim());
}

/** Reads the document into blocks; the first "# " heading becomes the page title. */
export function buildMethodsView(markdown: string): MethodsView {
  const lines = markdown.replace(/\r\n/g, '\n').split('\n');
  const blocks: MethodsBlock[] = [];
  const contents: MethodsView['contents'] = [];
  let title = 'Methods';
  let i = 0;
  while (i < lines.length) {
    const line = lines[i];
    const heading = /^(#{1,4})\s+(.*)$/.exec(line);
    if (line.trim() === '') {
      i++;
    } else if (heading) {
      const text = heading[2].trim();
      if (heading[1].length === 1) title = withoutEmphasis(text);
      else {
        const id = headingId(text);
        blocks.push({ kind: 'heading', level: heading[1].length, id, parts: inlineParts(text) });
        if (heading[1].length === 2) contents.push({ text: withoutEmphasis(text), href: `#${id}` });
      }
      i++;
    } else if (line.startsWith('    ')) {
      const pre: string[] = [];
      while (i < lines.length && (lines[i].startsWith('    ') || (lines[i].trim() === '' && lines[i + 1]?.startsWith('    ')))) pre.push(lines[i++].slice(4));
      blocks.push({ kind: 'pre', text: pre.join('\n') });
    } else if (line.trimStart().startsWith('|')) {
      const rows: string[][] = [];
      while (i < lines.length && lines[i].trimStart().startsWith('|')) {
        const cells = tableCells(lines[i++]);
        if (!cells.every((cell) => /^:?-+:?$/.test(cell))) rows.push(cells);
      }
      blocks.push({ kind: 'table', header: (rows[0] ?? []).map(inlineParts), rows: rows.slice(1).map((row) => row.map(inlineParts)) });
    } else if (line.startsWith('- ')) {
      const items: string[] = [];
      while (i < lines.length && (lines[i].startsWith('- ') || (lines[i].startsWith('  ') && items.length > 0))) {
        if (lines[i].startsWith('- ')) items.push(lines[i].slice(2).trim());
        else items[items.length - 1] += ` ${lines[i].trim()}`;
        i++;
      }
      blocks.push({ kind: 'list', items: items.map(inlineParts) });
    } else {
      const paragraph: string[] = [];
      while (i < lines.length && lines[i].trim() !== '' && !/^(#{1,4}\s|- |\s*\||    )/.test(lines[i])) paragraph.push(lines[i++].trim());
      blocks.push({ kind: 'paragraph', parts: inlineParts(paragraph.join(' ')) });
    }
  }
  return { title, breadcrumbs: [{ label: 'Panels', href: '/' }, { label: 'Methods', href: null }], contents, blocks };
}
