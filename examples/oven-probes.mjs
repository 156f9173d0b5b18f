// Writes oven-probes.csv: a bakery's deck oven logs three probe temperatures (°C, recorded to 0.1 °C) every
// 30 s over a 6-hour shift. The thermostat cycles the burner, so most readings come from two regimes,
// coasting and heating, each with its own level and with the probes moving together; after the door is
// opened to load bread the front probe drops and recovers over a few minutes, the centre and back less.
// The log is invented for hhat's examples; the generator is seeded, so the file is reproducible:
//
//   node examples/oven-probes.mjs [rows] [out.csv]      (defaults: 720, examples/oven-probes.csv)
import { writeFileSync } from 'node:fs';
import seedrandom from 'seedrandom';

const rows = Number(process.argv[2] ?? 720);
const out = process.argv[3] ?? new URL('./oven-probes.csv', import.meta.url);
const rng = seedrandom.xor4096('hhat example: oven probes');
const uniform = () => rng.double();
const normal = () => {
  // Box–Muller; one of the pair is enough here.
  const u = 1 - uniform();
  return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * uniform());
};
const lines = ['front_c,centre_c,back_c'];
for (let i = 0; i < rows; i++) {
  const regime = uniform();
  const shared = normal();
  let front;
  let centre;
  let back;
  if (regime < 0.55) {
    // Coasting: burner off.
    front = 205 + 2.0 * (0.75 * shared + 0.66 * normal());
    centre = 210 + 1.5 * (0.8 * shared + 0.6 * normal());
    back = 212 + 1.8 * (0.75 * shared + 0.66 * normal());
  } else if (regime < 0.9) {
    // Heating: burner on.
    front = 214 + 2.5 * (0.85 * shared + 0.53 * normal());
    centre = 218 + 1.8 * (0.85 * shared + 0.53 * normal());
    back = 219 + 2.0 * (0.8 * shared + 0.6 * normal());
  } else {
    // Door opened a moment ago: the front probe recovers exponentially from a drop of up to 24 °C.
    const drop = 24 * Math.exp(-3 * uniform());
    front = 205 - drop + 1.0 * normal();
    centre = 210 - 0.3 * drop + 1.2 * normal();
    back = 212 - 0.1 * drop + 1.5 * normal();
  }
  lines.push([front, centre, back].map((t) => t.toFixed(1)).join(','));
}
writeFileSync(out, `${lines.join('\n')}\n`);
