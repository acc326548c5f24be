// A recording picked in the browser, read only as far as the validation panel needs before it is
// sent: which files make it (one CSV, or a COMTRADE .cfg with its .dat), the CSV header's column
// names, the .cfg's analog channel ids and its data file type, and the .dat as text or base64.
// The server reads the whole recording again and is the one that decides what is valid.

const ending = (name) => name.toLowerCase().match(/\.([a-z0-9]+)$/)?.[1] ?? '';
const stem = (name) => name.replace(/\.[^.]*$/, '');

/**
 * The picked files as a recording: `{ kind: 'csv', csv }` or `{ kind: 'comtrade', cfg, dat }`.
 * Throws an Error saying what to pick instead when the files make neither.
 */
export function recordingOf(files) {
  const list = [...files];
  const by = (ext) => list.filter((f) => ending(f.name) === ext);
  const [csv, cfg, dat] = [by('csv'), by('cfg'), by('dat')];
  if (list.length === 1 && csv.length === 1) return { kind: 'csv', csv: csv[0] };
  if (list.length === 2 && cfg.length === 1 && dat.length === 1) {
    if (stem(cfg[0].name) !== stem(dat[0].name))
      throw new Error(`"${cfg[0].name}" and "${dat[0].name}" are not one record: a .cfg and its .dat share their name`);
    return { kind: 'comtrade', cfg: cfg[0], dat: dat[0] };
  }
  if (cfg.length === 1 && list.length === 1)
    throw new Error(`"${cfg[0].name}" alone: choose the .cfg and its .dat together (hold Ctrl or Shift in the file dialog)`);
  if (dat.length === 1 && list.length === 1)
    throw new Error(`"${dat[0].name}" alone: choose the .dat and its .cfg together (hold Ctrl or Shift in the file dialog)`);
  const names = list.map((f) => `"${f.name}"`).join(', ');
  throw new Error(`${names}: pick one .csv file, or one COMTRADE .cfg with its .dat`);
}

// The fields of one CSV line, quotes honoured ("" is a quote inside a quoted field).
function splitCsvLine(line, delimiter) {
  const fields = [];
  let field = '', quoted = false;
  for (let i = 0; i < line.length; i++) {
    const c = line[i];
    if (quoted) {
      if (c === '"' && line[i + 1] === '"') { field += '"'; i++; } else if (c === '"') quoted = false;
      else field += c;
    } else if (c === '"') quoted = true;
    else if (c === delimiter) { fields.push(field); field = ''; } else field += c;
  }
  fields.push(field);
  return fields.map((f) => f.trim());
}

/** The column names of a CSV recording's header row (comma or semicolon, whichever it uses). */
export function csvColumns(text) {
  const header = text.replace(/^\uFEFF/, '').split(/\r?\n/, 1)[0];
  const outside = header.replace(/"[^"]*"/g, '');
  const delimiter = outside.includes(',') || !outside.includes(';') ? ',' : ';';
  return splitCsvLine(header, delimiter).filter(Boolean);
}

const FILE_TYPES = ['ascii', 'binary', 'binary32', 'float32'];

/**
 * A COMTRADE configuration's analog channels `[{ id, unit }]` (line 3 onward) and its data file
 * type (`ascii`, `binary`, `binary32` or `float32`). Throws an Error naming the line when the
 * channel count or the file type line cannot be read.
 */
export function cfgInfo(text, name) {
  const lines = text.replace(/^\uFEFF/, '').split(/\r?\n/);
  const counts = (lines[1] ?? '').split(',').map((s) => s.trim());
  const analog = Number(/^(\d+)A$/i.exec(counts[1] ?? '')?.[1]);
  const digital = Number(/^(\d+)D$/i.exec(counts[2] ?? '')?.[1]);
  if (!Number.isInteger(analog) || !Number.isInteger(digital))
    throw new Error(`${name} line 2: expected "total,##A,##D", got "${(lines[1] ?? '').slice(0, 60)}"`);
  const channels = lines.slice(2, 2 + analog).map((l) => {
    const f = l.split(',').map((s) => s.trim());
    return { id: f[1] ?? '', unit: f[4] ?? '' };
  });
  const type = lines.slice(2 + analog + digital).map((l) => l.trim().toLowerCase()).find((l) => FILE_TYPES.includes(l));
  if (!type) throw new Error(`${name}: no file type line (ASCII, BINARY, BINARY32 or FLOAT32) after the channels`);
  return { channels, type };
}

/** The bytes of a binary file as base64 (in slices: one call per byte would overflow the stack). */
export async function base64Of(file) {
  const bytes = new Uint8Array(await file.arrayBuffer());
  let text = '';
  for (let i = 0; i < bytes.length; i += 0x8000) text += String.fromCharCode(...bytes.subarray(i, i + 0x8000));
  return btoa(text);
}

/** A file's size in words: bytes, kB or MB. */
export function sizeText(bytes) {
  if (bytes < 1024) return `${bytes} bytes`;
  if (bytes < 1024 * 1024) return `${(bytes / 1024).toFixed(1)} kB`;
  return `${(bytes / 1024 / 1024).toFixed(2)} MB`;
}
