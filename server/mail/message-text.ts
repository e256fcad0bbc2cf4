/**
 * Just enough of RFC 5322 / MIME (RFC 2045–2047) to show the caught messages to an admin:
 * unfolded headers, encoded-word subjects (B and Q), and a single text body in 7bit, 8bit,
 * base64 or quoted-printable. Multipart messages keep their first text/plain part; anything
 * else is shown raw. The whole message is always kept as received (mail_outbox.raw).
 */
function decodeWords(s: string): string {
  return s.replace(/=\?([^?]+)\?([BbQq])\?([^?]*)\?=/g, (_m, charset: string, enc: string, data: string) => {
    const buf = enc.toUpperCase() === 'B' ? Buffer.from(data, 'base64') : qpBytes(data.replace(/_/g, ' '));
    return charset.toLowerCase().replace('-', '') === 'utf8' ? buf.toString('utf8') : buf.toString('latin1');
  }).replace(/\?=\s+=\?/g, '?==?');
}

function qpBytes(s: string): Buffer {
  const out: number[] = [];
  const src = s.replace(/=\r?\n/g, '');
  for (let i = 0; i < src.length; i++) {
    const c = src[i]!;
    if (c === '=' && /^[0-9A-Fa-f]{2}$/.test(src.slice(i + 1, i + 3))) {
      out.push(parseInt(src.slice(i + 1, i + 3), 16));
      i += 2;
    } else out.push(...Buffer.from(c, 'utf8'));
  }
  return Buffer.from(out);
}

function parsePart(raw: string): { headers: Map<string, string>; body: string } {
  const sep = raw.search(/\r?\n\r?\n/);
  const head = sep < 0 ? raw : raw.slice(0, sep);
  const body = sep < 0 ? '' : raw.slice(sep).replace(/^\r?\n\r?\n/, '');
  const headers = new Map<string, string>();
  for (const line of head.replace(/\r?\n[ \t]+/g, ' ').split(/\r?\n/)) {
    const i = line.indexOf(':');
    if (i > 0) headers.set(line.slice(0, i).trim().toLowerCase(), line.slice(i + 1).trim());
  }
  return { headers, body };
}

function decodeBody(headers: Map<string, string>, body: string): string {
  const cte = (headers.get('content-transfer-encoding') ?? '7bit').toLowerCase();
  if (cte === 'base64') return Buffer.from(body.replace(/\s+/g, ''), 'base64').toString('utf8');
  if (cte === 'quoted-printable') return qpBytes(body).toString('utf8');
  return body;
}

export function messageText(raw: string): { subject: string; text: string } {
  const { headers, body } = parsePart(raw);
  const subject = decodeWords(headers.get('subject') ?? '');
  const ct = headers.get('content-type') ?? 'text/plain';
  const boundary = /boundary="?([^";]+)"?/i.exec(ct)?.[1];
  if (/^multipart\//i.test(ct) && boundary) {
    for (const part of body.split(`--${boundary}`).slice(1)) {
      const p = parsePart(part.replace(/^\r?\n/, ''));
      if (/^text\/plain/i.test(p.headers.get('content-type') ?? 'text/plain')) return { subject, text: decodeBody(p.headers, p.body).trimEnd() };
    }
    return { subject, text: body };
  }
  return { subject, text: decodeBody(headers, body).trimEnd() };
}
