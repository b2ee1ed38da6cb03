// Reading and rewriting effect files at the container level (dsp/FORMAT.md:
// u64 little-endian header length, JSON header, raw tensor data), so tests can
// break one rule at a time. Node's Buffer and JSON are the reference coder
// here, independent of worklet/loader.js.

export function parse(bytes) {
  const b = Buffer.from(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const n = Number(b.readBigUInt64LE(0));
  const header = JSON.parse(b.subarray(8, 8 + n).toString('utf8'));
  const data = Buffer.from(b.subarray(8 + n));
  const effect = JSON.parse(header.__metadata__['earshot.effect']);
  return { header, data, effect };
}

// Serialises header (with `effect` put back into the metadata unless
// rawHeaderText is given) and data; `headerLength` overrides the length field.
export function build({ header, data, effect }, { rawHeaderText, headerLength, rawEffectText } = {}) {
  let text = rawHeaderText;
  if (text === undefined) {
    const h = structuredClone(header);
    if (effect !== undefined || rawEffectText !== undefined) {
      h.__metadata__ = { ...h.__metadata__, 'earshot.effect': rawEffectText !== undefined ? rawEffectText : JSON.stringify(effect) };
    }
    text = JSON.stringify(h);
  }
  while ((8 + Buffer.byteLength(text)) % 8) text += ' ';
  const hb = Buffer.from(text, 'utf8');
  const out = Buffer.alloc(8 + hb.length + data.length);
  out.writeBigUInt64LE(BigInt(headerLength !== undefined ? headerLength : hb.length), 0);
  hb.copy(out, 8);
  data.copy(out, 8 + hb.length);
  return new Uint8Array(out.buffer, out.byteOffset, out.length);
}

export function tensorNames(header) {
  return Object.keys(header).filter((k) => k !== '__metadata__');
}

// Appends a tensor of float32 values at the end of the data section.
export function appendTensor(file, name, shape, values) {
  const f = { header: structuredClone(file.header), data: file.data, effect: file.effect };
  const bytes = Buffer.from(new Float32Array(values).buffer);
  const begin = f.data.length;
  f.header[name] = { dtype: 'F32', shape, data_offsets: [begin, begin + bytes.length] };
  f.data = Buffer.concat([f.data, bytes]);
  return f;
}
