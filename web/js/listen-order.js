// The participant's order: a seeded generator (mulberry32, a 32-bit
// state PRNG, common practice, no source) drives every random choice, so
// the seed in the results reproduces the trial and stimulus order exactly.

export function rng(seed) {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

// Fisher–Yates on a copy.
export function shuffled(list, rand) {
  const a = list.slice();
  for (let i = a.length - 1; i > 0; i--) {
    const j = Math.floor(rand() * (i + 1));
    [a[i], a[j]] = [a[j], a[i]];
  }
  return a;
}

// A fresh seed, 0 .. 2^32 - 1, from the browser's cryptographic generator.
export function newSeed() {
  return crypto.getRandomValues(new Uint32Array(1))[0];
}

export function newParticipantId() {
  const b = crypto.getRandomValues(new Uint8Array(6));
  return 'p-' + [...b].map((x) => x.toString(16).padStart(2, '0')).join('');
}

// The trials of `test` for `seed`, in presentation order.
//  mushra: { item, order: [condition ids as shown] }
//  abx:    { item, a, b, x: 'a'|'b' }
//  ab:     { item, a, b }
export function plan(test, seed) {
  const rand = rng(seed);
  const trials = [];
  if (test.type === 'mushra') {
    const ids = test.conditions.map((c) => c.id);
    for (const it of test.items) trials.push({ item: it.id, order: shuffled(ids, rand) });
  } else {
    for (const it of test.items) {
      for (const [p, q] of test.pairs) {
        for (let k = 0; k < test.trialsPerPair; k++) {
          const swap = rand() < 0.5;
          const t = { item: it.id, a: swap ? q : p, b: swap ? p : q };
          if (test.type === 'abx') t.x = rand() < 0.5 ? 'a' : 'b';
          trials.push(t);
        }
      }
    }
  }
  return shuffled(trials, rand);
}

// The familiarisation step's generator is seeded from the participant's seed
// but runs on its own stream, so plan() gives the same trials it always did.
// The constant is the first 32 bits of the fractional part of √2 (any fixed
// odd constant would do; common practice, no source).
export function familiarisationSeed(seed) {
  return (seed ^ 0x6a09e667) >>> 0;
}

// The familiarisation order for `seed`: the items shuffled, and the sounds of
// each item shuffled, as [{ item: id, conditions: [condition ids as shown] }].
// The results record it with familiarisationSeed(seed).
export function familiarisationPlan(test, seed) {
  const rand = rng(familiarisationSeed(seed));
  const ids = test.conditions.map((c) => c.id);
  return shuffled(test.items, rand).map((it) => ({ item: it.id, conditions: shuffled(ids, rand) }));
}
