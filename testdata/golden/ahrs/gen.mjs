// Writes madgwick-mahony.csv: the output of the npm package ahrs 1.3.3
// (Madgwick and Mahony filters) on 600 raw samples of the BROAD benchmark
// (Laidig et al., Data 6(7):72, 2021; trial 07_undisturbed_fast_rotation_B,
// data rows 8400–8999, a fast rotation up to ≈ 1400 °/s), for the
// sample-for-sample check in internal/fusion (TestBaselinesAgainstAhrs).
//
// Run from the repository root (npm is needed only to regenerate; never
// commit node_modules):
//
//   d=$(mktemp -d) && (cd "$d" && npm install --no-save ahrs@1.3.3) &&
//     AHRS_DIR="$d" node testdata/golden/ahrs/gen.mjs
//
// The shared data are read from ../shared/data/broad (KINCHAIN_SHARED_DATA
// overrides ../shared/data). To exercise the filters' special cases three
// input rows are edited: row 100 gets ay = 0 (Mahony then skips its
// correction), row 200 a zero magnetometer (both fall back to 6D for that
// sample), row 300 a zero accelerometer (no correction at all).
import fs from 'node:fs';
import path from 'node:path';
import { createRequire } from 'node:module';

const ahrsDir = process.env.AHRS_DIR;
if (!ahrsDir) {
  console.error('set AHRS_DIR to a directory where ahrs@1.3.3 is installed');
  process.exit(2);
}
const require = createRequire(path.join(path.resolve(ahrsDir), 'package.json'));
const pkg = require('ahrs/package.json');
if (pkg.version !== '1.3.3') {
  console.error(`ahrs ${pkg.version} installed; this golden file is for 1.3.3`);
  process.exit(2);
}
const AHRS = require('ahrs');

const shared = process.env.KINCHAIN_SHARED_DATA || path.join('..', 'shared', 'data');
const src = path.join(shared, 'broad', '07_undisturbed_fast_rotation_B.csv');
const lines = fs.readFileSync(src, 'utf8').split('\n');
const rate = parseFloat(lines[0].split('sampling_rate_hz:')[1]);
const header = lines[1].split(',');
if (header.slice(1, 10).join(',') !== 'gx,gy,gz,ax,ay,az,mx,my,mz') {
  throw new Error(`unexpected header ${lines[1]}`);
}
const first = 8400, n = 600;
const rows = lines.slice(2 + first, 2 + first + n).map(l => l.split(',').slice(1, 10));
rows[100][4] = '0';
rows[200][6] = rows[200][7] = rows[200][8] = '0';
rows[300][3] = rows[300][4] = rows[300][5] = '0';

// sampleInterval is in milliseconds.
const sampleInterval = 1000 / rate;
const configs = [
  { name: 'madgwick_9d', mag: true, opts: { algorithm: 'Madgwick', beta: 0.1, doInitialisation: true } },
  { name: 'madgwick_6d', mag: false, opts: { algorithm: 'Madgwick', beta: 0.1 } },
  { name: 'mahony_9d', mag: true, opts: { algorithm: 'Mahony', kp: 1, doInitialisation: true } },
  { name: 'mahony_6d_ki', mag: false, opts: { algorithm: 'Mahony', kp: 0.5, ki: 0.1 } },
];
const out = configs.map(() => []);
configs.forEach((c, k) => {
  const f = new AHRS({ sampleInterval, ...c.opts });
  for (const r of rows) {
    const v = r.map(Number);
    if (c.mag) f.update(v[0], v[1], v[2], v[3], v[4], v[5], v[6], v[7], v[8]);
    else f.update(v[0], v[1], v[2], v[3], v[4], v[5]);
    const q = f.getQuaternion();
    out[k].push([q.w, q.x, q.y, q.z].map(String).join(','));
  }
});

const opt = c => Object.entries(c.opts).map(([k, v]) => `${k}=${v}`).join(' ');
let text = `# npm ahrs ${pkg.version} on BROAD 07_undisturbed_fast_rotation_B rows ${first}-${first + n - 1}; written by gen.mjs\n`;
text += `# sample_interval_ms: ${sampleInterval}\n`;
for (const c of configs) text += `# ${c.name}: ${opt(c)}${c.mag ? '' : ' (no magnetometer)'}\n`;
text += ['gx,gy,gz,ax,ay,az,mx,my,mz', ...configs.map(c => ['qw', 'qx', 'qy', 'qz'].map(s => `${c.name}_${s}`).join(','))].join(',') + '\n';
rows.forEach((r, i) => {
  text += [r.join(','), ...out.map(o => o[i])].join(',') + '\n';
});
fs.writeFileSync(path.join(path.dirname(new URL(import.meta.url).pathname), 'madgwick-mahony.csv'), text);
