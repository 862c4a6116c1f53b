/**
 * "§x.y" references into docs/methods.md: finding them in text (code comments, threshold
 * descriptions, flag evidence), the section numbers of the document's headings, and the anchor
 * each section gets on the /methods page. One definition, so the page's anchors, the links in
 * other pages and test/docs/methods-links.test.ts agree.
 */

/** Where the methods document is served. */
export const METHODS_PATH = '/methods';

/**
 * A reference: "§2.4a", "§1.2–1.3" (a range), "§3.7 b–d" (lettered subsections), "§5" (a chapter).
 * Groups: 1 number, 2 letter, 3–4 letter range, 5–6 end of a numeric range.
 */
const REFERENCE = /§\s?(\d+(?:\.\d+)*)([a-z])?(?:\s?([a-z])[–-]([a-z]))?(?:[–-](\d+(?:\.\d+)*)([a-z])?)?/g;

/** A numbered heading of the document: "## 3. …", "### 3.4 …", "#### 3.7a …". */
const HEADING = /^(#{2,4})\s+(\d+(?:\.\d+)*[a-z]?)\.?\s+(.*)$/;

export interface MethodsReference {
  /** The text as written, e.g. "§3.7 b–d". */
  text: string;
  /** Offset of the "§" in the searched text. */
  index: number;
  /** Every section the reference names that must exist, e.g. ["3.7b", "3.7c", "3.7d"]. */
  sections: string[];
}

export function findMethodsReferences(text: string): MethodsReference[] {
  const out: MethodsReference[] = [];
  for (const match of text.matchAll(REFERENCE)) {
    const [whole, number, letter, fromLetter, toLetter, endNumber, endLetter] = match;
    const sections: string[] = [];
    if (fromLetter !== undefined && toLetter !== undefined) {
      for (let code = fromLetter.charCodeAt(0); code <= toLetter.charCodeAt(0); code++) sections.push(number + String.fromCharCode(code));
    } else {
      sections.push(number + (letter ?? ''));
    }
    if (endNumber !== undefined) sections.push(endNumber + (endLetter ?? ''));
    out.push({ text: whole, index: match.index ?? 0, sections });
  }
  return out;
}

/** The HTML id of a section on the methods page: "3.7a" → "s3-7a". */
export function sectionAnchor(section: string): string {
  return `s${section.replace(/\./g, '-')}`;
}

/** Link to a section of the methods page. */
export function sectionHref(section: string): string {
  return `${METHODS_PATH}#${sectionAnchor(section)}`;
}

export interface MethodsHeading {
  /** 2 for "##", 3 for "###", 4 for "####". */
  level: number;
  section: string;
  title: string;
}

/** Numbered headings of the methods document, in order. */
export function methodsHeadings(markdown: string): MethodsHeading[] {
  const out: MethodsHeading[] = [];
  for (const line of markdown.split('\n')) {
    const match = HEADING.exec(line.trimEnd());
    if (match) out.push({ level: match[1].length, section: match[2], title: match[3] });
  }
  return out;
}

/** A piece of text for a template: plain, or a link to a methods section. */
export interface TextPart {
  text: string;
  href: string | null;
}

/** Splits text so that each "§" reference becomes a link to its (first) section. */
export function linkMethodsReferences(text: string): TextPart[] {
  const parts: TextPart[] = [];
  let at = 0;
  for (const reference of findMethodsReferences(text)) {
    if (reference.index > at) parts.push({ text: text.slice(at, reference.index), href: null });
    parts.push({ text: reference.text, href: sectionHref(reference.sections[0]) });
    at = reference.index + reference.text.length;
  }
  if (at < text.length) parts.push({ text: text.slice(at), href: null });
  return parts;
}
