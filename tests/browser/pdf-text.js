// The pages and the text of a PDF, read with Node's own zlib and nothing else: enough of the
// PDF format (ISO 32000-1) for what Chromium's print to PDF writes. Objects are found by their
// `N 0 obj ... endobj` frames (7.3.10), streams inflated where they are FlateDecode (7.4.4),
// pages counted by their /Type /Page dictionaries (7.7.3.3), and the text shown by Tj, TJ, '
// and " in each page's content streams (9.4.3) mapped to Unicode through each font's ToUnicode
// CMap (9.10.3; bfchar and bfrange). Object streams (7.5.7) are read too.
'use strict';
const zlib = require('zlib');

function objects(buf) {
  const text = buf.toString('latin1');
  const out = new Map();
  const re = /(\d+)\s+0\s+obj\b/g;
  let m;
  while ((m = re.exec(text))) {
    const start = m.index + m[0].length;
    const end = text.indexOf('endobj', start);
    if (end < 0) break;
    const body = text.slice(start, end);
    const s = body.search(/\bstream\r?\n/);
    let dict = body;
    let data = null;
    if (s >= 0) {
      dict = body.slice(0, s);
      const from = start + s + body.slice(s).match(/^stream\r?\n/)[0].length;
      const stop = text.lastIndexOf('endstream', end);
      data = buf.subarray(from, stop);
      if (/\/FlateDecode/.test(dict)) {
        try { data = zlib.inflateSync(data); } catch (e) { data = zlib.inflateSync(data, { finishFlush: zlib.constants.Z_SYNC_FLUSH }); }
      }
    }
    out.set(Number(m[1]), { dict: dict, data: data });
    re.lastIndex = end;
  }
  // Objects kept inside object streams.
  for (const [, o] of [...out]) {
    if (!/\/Type\s*\/ObjStm/.test(o.dict) || !o.data) continue;
    const n = Number((o.dict.match(/\/N\s+(\d+)/) || [])[1] || 0);
    const first = Number((o.dict.match(/\/First\s+(\d+)/) || [])[1] || 0);
    const s = o.data.toString('latin1');
    const nums = s.slice(0, first).trim().split(/\s+/).map(Number);
    for (let i = 0; i < n; i++) {
      const num = nums[2 * i];
      const off = first + nums[2 * i + 1];
      const next = i + 1 < n ? first + nums[2 * i + 3] : s.length;
      if (!out.has(num)) out.set(num, { dict: s.slice(off, next), data: null });
    }
  }
  return out;
}

// A ToUnicode CMap as a map from code (hex) to text, and the code length in bytes.
function cmap(data) {
  const s = data.toString('latin1');
  const map = new Map();
  const hexText = (h) => {
    let t = '';
    for (let i = 0; i + 4 <= h.length; i += 4) t += String.fromCharCode(parseInt(h.slice(i, i + 4), 16));
    return t;
  };
  const space = s.match(/begincodespacerange\s*<([0-9A-Fa-f]+)>/);
  const bytes = space ? space[1].length / 2 : 2;
  for (const block of s.matchAll(/beginbfchar([\s\S]*?)endbfchar/g)) {
    for (const m of block[1].matchAll(/<([0-9A-Fa-f]+)>\s*<([0-9A-Fa-f]*)>/g)) map.set(parseInt(m[1], 16), hexText(m[2]));
  }
  for (const block of s.matchAll(/beginbfrange([\s\S]*?)endbfrange/g)) {
    for (const m of block[1].matchAll(/<([0-9A-Fa-f]+)>\s*<([0-9A-Fa-f]+)>\s*(<[0-9A-Fa-f]*>|\[[^\]]*\])/g)) {
      const lo = parseInt(m[1], 16);
      const hi = parseInt(m[2], 16);
      if (m[3].startsWith('[')) {
        [...m[3].matchAll(/<([0-9A-Fa-f]*)>/g)].forEach((d, i) => map.set(lo + i, hexText(d[1])));
      } else {
        const h = m[3].slice(1, -1);
        const last = parseInt(h.slice(-4), 16);
        for (let c = lo; c <= hi; c++) map.set(c, hexText(h.slice(0, -4)) + String.fromCharCode(last + c - lo));
      }
    }
  }
  return { map: map, bytes: bytes };
}

// The bytes of a PDF string token: <hex> or (literal) with its escapes (7.3.4.2).
function stringBytes(tok) {
  if (tok.startsWith('<')) {
    const h = tok.slice(1, -1).replace(/\s+/g, '');
    const out = [];
    for (let i = 0; i < h.length; i += 2) out.push(parseInt((h.slice(i, i + 2) + '0').slice(0, 2), 16));
    return out;
  }
  const out = [];
  const s = tok.slice(1, -1);
  for (let i = 0; i < s.length; i++) {
    const c = s[i];
    if (c !== '\\') { out.push(c.charCodeAt(0) & 0xff); continue; }
    const n = s[++i];
    const esc = { n: 10, r: 13, t: 9, b: 8, f: 12 };
    if (n in esc) out.push(esc[n]);
    else if (/[0-7]/.test(n)) {
      let oct = n;
      while (oct.length < 3 && /[0-7]/.test(s[i + 1])) oct += s[++i];
      out.push(parseInt(oct, 8) & 0xff);
    } else if (n === '\r' || n === '\n') { /* a line continuation */ } else out.push(n.charCodeAt(0));
  }
  return out;
}

// The dictionary under `key` in a dictionary's text: inline (<< ... >>, nested ones kept
// whole) or as an indirect reference.
function resolve(objs, dictText, key) {
  const at = dictText.search(new RegExp(`/${key}\\s*<<`));
  if (at >= 0) {
    let i = dictText.indexOf('<<', at);
    const start = i + 2;
    let depth = 0;
    for (; i < dictText.length - 1; i++) {
      if (dictText[i] === '<' && dictText[i + 1] === '<') { depth += 1; i += 1; } else if (dictText[i] === '>' && dictText[i + 1] === '>') {
        depth -= 1;
        if (depth === 0) return dictText.slice(start, i);
        i += 1;
      }
    }
    return dictText.slice(start);
  }
  const ref = dictText.match(new RegExp(`/${key}\\s+(\\d+)\\s+0\\s+R`));
  if (ref && objs.has(Number(ref[1]))) return objs.get(Number(ref[1])).dict;
  return '';
}

// { pages, text }: the page count and the text of every page, pages separated by a form feed.
function pdfText(buf) {
  const objs = objects(buf);
  const fonts = new Map();
  for (const [num, o] of objs) {
    const t = o.dict.match(/\/ToUnicode\s+(\d+)\s+0\s+R/);
    if (t && objs.has(Number(t[1])) && objs.get(Number(t[1])).data) fonts.set(num, cmap(objs.get(Number(t[1])).data));
  }
  const pages = [...objs.values()].filter((o) => /\/Type\s*\/Page(?!s)\b/.test(o.dict));
  const texts = pages.map((page) => {
    let resources = resolve(objs, page.dict, 'Resources');
    if (!resources) resources = page.dict;
    const fontDict = resolve(objs, resources, 'Font');
    const names = new Map();
    for (const m of fontDict.matchAll(/\/([^\s/<>\[\]()]+)\s+(\d+)\s+0\s+R/g)) names.set(m[1], fonts.get(Number(m[2])));
    const contents = page.dict.match(/\/Contents\s*(\[[^\]]*\]|\d+\s+0\s+R)/);
    const refs = contents ? [...contents[1].matchAll(/(\d+)\s+0\s+R/g)].map((m) => Number(m[1])) : [];
    let out = '';
    for (const ref of refs) {
      const o = objs.get(ref);
      if (!o || !o.data) continue;
      const s = o.data.toString('latin1');
      let font = null;
      const re = /\/([^\s/<>\[\]()]+)\s+[-\d.]+\s+Tf|<[0-9A-Fa-f\s]*>|\((?:\\[\s\S]|[^\\)])*\)|\bT[Jj*]\b|\bT[dD]\b|\bET\b|'|"/g;
      let m;
      while ((m = re.exec(s))) {
        const tok = m[0];
        if (m[1] !== undefined) { font = names.get(m[1]) || null; continue; }
        if (tok === 'ET' || tok === 'Td' || tok === 'TD' || tok === 'T*' || tok === "'" || tok === '"') { out += '\n'; continue; }
        if (tok === 'Tj' || tok === 'TJ') continue;
        const bytes = stringBytes(tok);
        if (!font) { out += String.fromCharCode(...bytes); continue; }
        for (let i = 0; i + font.bytes <= bytes.length; i += font.bytes) {
          let code = 0;
          for (let k = 0; k < font.bytes; k++) code = code * 256 + bytes[i + k];
          out += font.map.has(code) ? font.map.get(code) : '';
        }
      }
    }
    return out;
  });
  return { pages: pages.length, text: texts.join('\f') };
}

module.exports = { pdfText };

if (require.main === module) {
  const r = pdfText(require('fs').readFileSync(process.argv[2]));
  console.log(`${r.pages} pages`);
  console.log(r.text);
}
