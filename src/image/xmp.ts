/**
 * The XMP provenance packet every kinhue output carries (ISO 16684-1 / Adobe XMP Specification
 * Part 1 and 2): dc:description saying the colour is an estimate, xmpMM:DerivedFrom naming the
 * source file (stRef:filePath), xmp:CreatorTool naming kinhue and its version.
 */
import { randomUUID } from 'node:crypto';
import { basename } from 'node:path';
import { VERSION } from '../version.js';

/** kinhue's own XMP namespace for fields no standard schema has. */
export const KINHUE_XMP_NAMESPACE = 'urn:x-kinhue:provenance:1.0#';

export interface ProvenanceFields {
  /** The source scan; its path is recorded as given (callers pass it relative when they can). */
  sourceFile: string;
  /** Default "kinhue <version>". */
  creatorTool?: string;
  /** Default: a sentence saying the colours are an estimate made by kinhue from the named source. */
  description?: string;
  /** SHA-256 (hex) of the source file's bytes. */
  derivedFromHash?: string;
  /** When the output was made; default now. */
  createDate?: Date;
  /** Extra kinhue fields, e.g. { model: 'kinhue-base-1', confidenceMap: 'photo.confidence.png' }. */
  extra?: Record<string, string | number>;
}

function escapeXml(text: string): string {
  return (
    text
      .replace(/&/g, '&amp;')
      .replace(/</g, '&lt;')
      .replace(/>/g, '&gt;')
      .replace(/"/g, '&quot;')
      // XML 1.0 forbids most control characters; drop them rather than write an unreadable packet.
      .replace(/[\u0000-\u0008\u000b\u000c\u000e-\u001f]/g, '')
  );
}

/** The default dc:description for an output made from `sourceFile`. */
export function estimateStatement(sourceFile: string): string {
  return (
    `Colourised interpretation of the black-and-white photograph ${basename(sourceFile)}, made by kinhue. ` +
    'The colours are an estimate by a machine-learning model, not a record of the original colours.'
  );
}

/**
 * A complete XMP packet (with xpacket wrapper and padding) recording where an output came from.
 *
 * @example
 * const xmp = provenanceXmp({ sourceFile: 'scans/1952-wedding.tif', derivedFromHash: sha256 });
 * await encodeImage(pixels, 'out/1952-wedding.png', { format: 'png', xmp });
 */
export function provenanceXmp(fields: ProvenanceFields): string {
  const tool = fields.creatorTool ?? `kinhue ${VERSION}`;
  const description = fields.description ?? estimateStatement(fields.sourceFile);
  const date = (fields.createDate ?? new Date()).toISOString();
  const extra = Object.entries(fields.extra ?? {})
    .filter(([key]) => /^[A-Za-z][A-Za-z0-9]*$/.test(key))
    .map(([key, value]) => `\n    <kinhue:${key}>${escapeXml(String(value))}</kinhue:${key}>`)
    .join('');
  const hash = fields.derivedFromHash ? `\n    <kinhue:sourceSha256>${escapeXml(fields.derivedFromHash)}</kinhue:sourceSha256>` : '';
  const body = `<x:xmpmeta xmlns:x="adobe:ns:meta/">
 <rdf:RDF xmlns:rdf="http://www.w3.org/1999/02/22-rdf-syntax-ns#">
  <rdf:Description rdf:about=""
    xmlns:dc="http://purl.org/dc/elements/1.1/"
    xmlns:xmp="http://ns.adobe.com/xap/1.0/"
    xmlns:xmpMM="http://ns.adobe.com/xap/1.0/mm/"
    xmlns:stRef="http://ns.adobe.com/xap/1.0/sType/ResourceRef#"
    xmlns:kinhue="${KINHUE_XMP_NAMESPACE}">
    <dc:description>
     <rdf:Alt>
      <rdf:li xml:lang="x-default">${escapeXml(description)}</rdf:li>
     </rdf:Alt>
    </dc:description>
    <dc:source>${escapeXml(fields.sourceFile)}</dc:source>
    <xmp:CreatorTool>${escapeXml(tool)}</xmp:CreatorTool>
    <xmp:CreateDate>${date}</xmp:CreateDate>
    <xmp:MetadataDate>${date}</xmp:MetadataDate>
    <xmpMM:InstanceID>xmp.iid:${randomUUID()}</xmpMM:InstanceID>
    <xmpMM:DerivedFrom rdf:parseType="Resource">
     <stRef:filePath>${escapeXml(fields.sourceFile)}</stRef:filePath>
    </xmpMM:DerivedFrom>${hash}${extra}
  </rdf:Description>
 </rdf:RDF>
</x:xmpmeta>`;
  // 2 KB of padding lets other tools edit the packet in place (XMP Part 1, 7.3.3: common practice).
  const padding = `${' '.repeat(99)}\n`.repeat(20);
  return `<?xpacket begin="\uFEFF" id="W5M0MpCehiHzreSzNTczkc9d"?>\n${body}\n${padding}<?xpacket end="w"?>`;
}
