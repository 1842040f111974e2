// The synthetic scenario: long, multi-day, invented conversations (bike workshop customers, a plant
// nursery help desk, language tutor students) with planted facts, later updates of some of them, small
// talk and distractors, plus probes of two kinds: `fact:` (recall a planted fact) and `latest:` (the
// value after an update; only the updating turn is expected). Deterministic for a given seed.
// `npm run bench -- scenario --out DIR [--seed N] [--sessions N]` writes transcript.jsonl + probes.jsonl.

import { rng } from './stats.js';
/** mulberry32, seeded (see bench/lib/stats.ts). */
export const prng = rng;

export interface ScenarioOptions {
  /** @default 7 */
  seed?: number;
  /** @default 20 */
  sessions?: number;
  /** Turns per session (user + assistant), drawn uniformly in [minTurns, maxTurns]. @default 300 */
  minTurns?: number;
  /** @default 1000 */
  maxTurns?: number;
}

export const SCENARIO_DEFAULTS: Required<ScenarioOptions> = { seed: 7, sessions: 20, minTurns: 300, maxTurns: 1000 };

export interface ScenarioTurn {
  session: string;
  turn: string;
  role: 'user' | 'assistant';
  text: string;
  at: string;
}

export interface ScenarioProbe {
  id: string;
  session: string;
  query: string;
  expect: string[];
  after?: string;
}

export interface Scenario {
  turns: ScenarioTurn[];
  probes: ScenarioProbe[];
}

type Rand = () => number;
type Vals = Record<string, string>;
const pick = <T>(r: Rand, xs: readonly T[]): T => xs[Math.floor(r() * xs.length)]!;
const fill = (tpl: string, v: Vals): string => tpl.replace(/\{(\w+)\}/g, (_, k: string) => v[k] ?? `{${k}}`);

// ------------------------------------------------------------------ invented vocabulary

const FIRST = ['Dana', 'Priya', 'Tomasz', 'Ines', 'Kwame', 'Maren', 'Yusuf', 'Leonie', 'Oskar', 'Ayla', 'Rafael', 'Suki', 'Bram', 'Noor', 'Ilse', 'Teodor', 'Mira', 'Callum', 'Zofia', 'Emeka'];
const LAST = ['Whitfield', 'Okafor', 'Lindqvist', 'Moreau', 'Castellanos', 'Haddad', 'Brennan', 'Novak', 'Achterberg', 'Saltmarsh', 'Penhallow', 'Quist'];
const STREETS = ['Mill Lane', 'Orchard Row', 'Kestrel Road', 'Fennel Street', 'Tanner Walk', 'Beacon Hill', 'Larch Avenue', 'Quarry Close', 'Willow Bank', 'Harbour Terrace'];
const TOWNS = ['Ashwendle', 'Brackenby', 'Dunmarrow', 'Elmquist', 'Fordlecote', 'Glenquarrie', 'Hollowmere', 'Kirkwendle', 'Lindquarry', 'Marrowdene'];
const BRANDS = ['Quorlan', 'Ferrow', 'Brackett', 'Velloni', 'Orrin', 'Tavrenne', 'Wyndelo', 'Colbrenna'];
const MODELS = ['Audax', 'Vagabond', 'Tourer', 'Sprint 2', 'Trail 9', 'Roamer', 'Cityline', 'Gravel X'];
const COLOURS = ['green', 'red', 'matte black', 'teal', 'orange', 'cream', 'silver', 'navy'];
const PARTS = ['inner tubes', 'brake pads', 'spare chains', 'bottle cages', 'tyre levers', 'cable ties'];
const PLANTS = ['fiddle leaf fig', 'monstera', 'snake plant', 'calathea', 'olive tree', 'string of pearls', 'bird of paradise', 'peace lily'];
const PETS = ['Miso', 'Biscuit', 'Pickle', 'Juniper', 'Noodle', 'Pepper', 'Waffle', 'Ziggy'];
const SUPPLIES = ['bags of compost', 'terracotta pots', 'bags of perlite', 'plant labels', 'bags of bark mulch'];
const ALLERGENS = ['birch pollen', 'lilies', 'ragweed', 'chrysanthemums', 'latex', 'grass pollen'];
const LANGS = ['Portuguese', 'Japanese', 'Finnish', 'Korean', 'Dutch', 'Turkish', 'Greek', 'Swahili'];
const LEVELS = ['A2', 'B1', 'B2', 'C1'];
const DAYS = ['Monday', 'Tuesday', 'Wednesday', 'Thursday', 'Friday', 'Saturday'];
const TIMES = ['9am', '10:30', '2pm', '4pm', '6pm', '7:30pm'];
const MONTHS = ['March', 'April', 'May', 'June', 'September', 'October', 'November'];
const ORDINAL = ['3rd', '8th', '12th', '14th', '19th', '22nd', '27th'];

// ------------------------------------------------------------------ fact types

interface FactType {
  name: string;
  make(r: Rand): Vals;
  state: string[];
  /** Update templates and how the new values are drawn. */
  update?: { make(r: Rand, old: Vals): Vals; say: string[]; /** Forms that name the topic, used when the update comes long after. */ sayLong?: string[] };
  /** Probe questions (third person, as a bot developer writes them). */
  ask: string[];
  /** What the user may ask later about it (a question; the read reinforces the slot). */
  remind?: string[];
}

const other = <T>(r: Rand, xs: readonly T[], not: T): T => {
  for (;;) {
    const x = pick(r, xs);
    if (x !== not) return x;
  }
};

const NAME: FactType = {
  name: 'name',
  make: (r) => ({ first: pick(r, FIRST), last: pick(r, LAST) }),
  state: ['Hi, my name is {first} {last}.', 'You can call me {first}.', "I'm called {first} {last}, by the way.", 'Hello there, my name is {first}.'],
  ask: ["What is the customer's name?", 'What name did they give?', "What is the customer's first name?"],
};

const ADDRESS: FactType = {
  name: 'address',
  make: (r) => ({ n: String(2 + Math.floor(r() * 180)), street: pick(r, STREETS), town: pick(r, TOWNS) }),
  state: ['I live at {n} {street}, {town}.', 'My address is {n} {street} in {town}.', 'My home address is {n} {street}, {town}.'],
  update: {
    make: (r, old) => ({ n: String(2 + Math.floor(r() * 180)), street: other(r, STREETS, old.street!), town: other(r, TOWNS, old.town!) }),
    say: ['I just moved to {n} {street}, {town}.', 'My new address is {n} {street}, {town}.', "We've moved house, my address is now {n} {street} in {town}."],
    sayLong: ['I just moved to {n} {street}, {town}.', 'My new address is {n} {street}, {town}.', "We've moved house, my address is now {n} {street} in {town}."],
  },
  ask: ["What is the customer's home address?", 'Which street and town does the customer live in?', 'What address should we use for them?'],
  remind: ['Do you still have my address on file?'],
};

const BOOKING = (what: string, noun: string): FactType => ({
  name: noun,
  make: (r) => ({ day: pick(r, DAYS), time: pick(r, TIMES) }),
  state: [`Can I book ${what} for {day}?`, `I'd like to book ${what} on {day} at {time}.`, `Please schedule ${what} for {day} at {time}.`],
  update: {
    make: (r, old) => ({ day: other(r, DAYS, old.day!), time: old.time! }),
    say: ['Actually, make it {day}.', 'Can we move it to {day} instead?', 'Change that to {day}, please.', 'Sorry, something came up, could we do {day} instead?'],
    sayLong: [`Can we move the ${noun} to {day} instead?`, `Something came up, I need to reschedule the ${noun} for {day}.`, `Actually, could the ${noun} be on {day}?`],
  },
  ask: [`When is the ${noun}?`, `Which day is the ${noun} booked for?`, `What day did they pick for the ${noun}?`],
  remind: [`Remind me, when is my ${noun}?`, `What day was my ${noun} again?`],
});

const QUANTITY = (items: readonly string[], verb: string[]): FactType => ({
  name: 'order',
  make: (r) => ({ q: String(2 + Math.floor(r() * 9)), item: pick(r, items) }),
  state: verb,
  update: {
    make: (r, old) => ({ q: String(Number(old.q) + 1 + Math.floor(r() * 6)), item: old.item! }),
    say: ['Make it {q} instead.', 'Actually, I will need {q} of those.', 'Can you change the order to {q}?'],
  },
  ask: ['How many {item} did they order?', 'What quantity of {item} do they want?'],
});

const BIKE: FactType = {
  name: 'bike',
  make: (r) => ({ colour: pick(r, COLOURS), brand: pick(r, BRANDS), model: pick(r, MODELS) }),
  state: ['I ride a {colour} {brand} {model}.', 'My bike is a {colour} {brand} {model}.', "I've got a {brand} {model}, the {colour} one."],
  ask: ['Which bike does the customer ride?', 'What make and model is their bike?'],
  remind: ['Do you have parts for my bike in stock?'],
};

const PHONE: FactType = {
  name: 'phone',
  make: (r) => ({ num: `07700 900${String(Math.floor(r() * 1000)).padStart(3, '0')}` }), // the UK range set aside for fiction
  state: ['My phone number is {num}.', 'You can reach me on {num}.', 'My mobile is {num}.'],
  ask: ["What is the customer's phone number?", 'Which number can we call them on?'],
};

const PLANT: FactType = {
  name: 'plant',
  make: (r) => ({ plant: pick(r, PLANTS), room: pick(r, ['living room', 'bedroom', 'kitchen', 'hallway']) }),
  state: ['I have a {plant} in the {room}.', 'My {plant} in the {room} is looking sad.', 'I bought a {plant} for the {room} last month.'],
  ask: ['Which plant is in their {room}?', 'What plant do they keep in the {room}?'],
  remind: ['Any new tips for my plant?'],
};

const PET: FactType = {
  name: 'pet',
  make: (r) => ({ pet: pick(r, PETS), kind: pick(r, ['cat', 'dog', 'rabbit']) }),
  state: ['My {kind} is called {pet}.', 'Our {kind} {pet} chews on everything.', 'I have a {kind} named {pet}.'],
  ask: ["What is the name of the customer's {kind}?", 'What is their {kind} called?'],
};

const ALLERGY: FactType = {
  name: 'allergy',
  make: (r) => ({ a: pick(r, ALLERGENS) }),
  state: ["I'm allergic to {a}.", 'Just so you know, I am quite allergic to {a}.', 'Remember that I react badly to {a}.'],
  ask: ['What is the customer allergic to?', 'Which allergy did they mention?'],
};

const LANGUAGE: FactType = {
  name: 'language',
  make: (r) => ({ lang: pick(r, LANGS) }),
  state: ["I'm learning {lang}.", 'My target language is {lang}.', 'I want to get better at {lang} this year.'],
  ask: ['Which language is the student learning?', 'What language do they study?'],
};

const LEVEL: FactType = {
  name: 'level',
  make: (r) => ({ level: pick(r, LEVELS) }),
  state: ['My level is {level}.', "I'd say my current level is about {level}.", 'My last placement test put me at {level}.'],
  update: {
    make: (r, old) => ({ level: other(r, LEVELS, old.level!) }),
    say: ['Update: my level is now {level}.', 'I passed the test, so my level is {level} now.'],
    sayLong: ['Update: my level is now {level}.', 'I passed the test, so my level is {level} now.'],
  },
  ask: ["What is the student's level?", 'Which level is the student at?'],
};

const EXAM: FactType = {
  name: 'exam',
  make: (r) => ({ date: `the ${pick(r, ORDINAL)} of ${pick(r, MONTHS)}` }),
  state: ['My exam is on {date}.', 'The oral exam is scheduled for {date}.', 'I sit my exam on {date}.'],
  update: {
    make: (r, old) => ({ date: `the ${pick(r, ORDINAL)} of ${other(r, MONTHS, old.date!.split(' of ')[1]!)}` }),
    say: ['The exam got moved to {date}.', 'Actually, my exam is now on {date}.'],
    sayLong: ['The exam got moved to {date}.', 'Actually, my exam is now on {date}.'],
  },
  ask: ["When is the student's exam?", 'What date is the exam?'],
  remind: ['How many weeks do I have until my exam?'],
};

const HOMETOWN: FactType = {
  name: 'hometown',
  make: (r) => ({ town: pick(r, TOWNS) }),
  state: ["I'm originally from {town}.", 'I grew up in {town}.', "I'm from {town}."],
  ask: ['Which town is the student from?', 'Which town did they grow up in?'],
};

// ------------------------------------------------------------------ domains

interface Domain {
  name: string;
  facts: FactType[];
  /** User chatter: questions about the trade, small talk, statements about other people and things. */
  chatter: string[];
  replies: string[];
}

const SMALL_TALK = ['Thanks!', 'ok', 'Great, cheers.', 'Hi again!', 'Good morning!', 'Cool.', 'Thank you so much', 'Haha, yes.', 'Bye for now.', 'Sure.'];
const REPLIES_COMMON = ['Got it.', 'Noted, thanks.', 'Happy to help!', 'Sure thing.', 'Of course.', 'Let me check that for you.'];

const BIKE_SHOP: Domain = {
  name: 'bike',
  facts: [NAME, BIKE, ADDRESS, BOOKING('a service', 'service appointment'), QUANTITY(PARTS, ['I need {q} {item}.', 'Could you order {q} {item} for me?', 'Put me down for {q} {item}, please.']), PHONE],
  chatter: [
    'How much is a full tune-up?', 'Do you fix hydraulic brakes?', 'What time do you close on Saturdays?', 'Is it worth upgrading to tubeless tyres?',
    'My neighbour rides a {brand} too.', 'My sister lives in {town}.', 'I went riding near {town} last weekend.', 'The weather has been awful for cycling.',
    'My commute is about 20 minutes.', 'My friend {first} recommended you.', 'Do you sell {brand} saddles?', 'How often should I oil the chain?',
    'My old bike was a {brand} {model}.', 'I think the gears are slipping a bit.', 'There is a clicking noise when I pedal hard.', 'Can you true a wheel while I wait?',
    'We did a long ride along {street} yesterday.', 'My colleague needs {q} {item} as well, but she will call you herself.',
  ],
  replies: ['A full tune-up is 65 pounds.', 'We close at 5pm on Saturdays.', 'Yes, we service hydraulic brakes.', 'Bring it in and we will take a look.', 'Tubeless is worth it for commuting.'],
};

const NURSERY: Domain = {
  name: 'plant',
  facts: [NAME, PLANT, PET, ADDRESS, BOOKING('a delivery', 'delivery'), QUANTITY(SUPPLIES, ['I would like {q} {item}.', 'Please add {q} {item} to my order.', 'Can I get {q} {item}?']), ALLERGY],
  chatter: [
    'How often should I water a {plant}?', 'Is a {plant} safe for cats?', 'Do you deliver on Sundays?', 'What soil do succulents like?',
    'My mum has a {plant} that is doing great.', 'My neighbour in {town} gave me cuttings.', 'The leaves are going brown at the tips.', 'I think I overwatered it.',
    'My friend {first} has a greenhouse.', 'Should I repot in spring?', 'There are tiny flies in the soil.', 'We get a lot of light in the mornings.',
    'My office plant died while I was on holiday.', 'Do you have any {plant} in stock?', 'I visited the garden show in {town} last week.', 'My brother wants {q} {item} too, he will order online.',
  ],
  replies: ['Water it when the top inch of soil is dry.', 'We deliver Monday to Saturday.', 'Repotting in spring is best.', 'Those are fungus gnats; let the soil dry out.'],
};

const TUTOR: Domain = {
  name: 'tutor',
  facts: [NAME, LANGUAGE, LEVEL, EXAM, BOOKING('my lessons', 'lesson'), HOMETOWN, PHONE],
  chatter: [
    'How do I remember irregular verbs?', 'Can you explain the subjunctive again?', 'What is a good podcast for listening practice?', 'How many new words should I learn a day?',
    'My friend {first} is learning {lang} too.', 'My partner speaks a little {lang}.', 'I watched a film in {lang} yesterday.', 'I keep mixing up the past tenses.',
    'My flatmate is from {town}.', 'Is it normal to feel stuck at this stage?', 'I practised for an hour on the train.', 'Could we do more speaking next time?',
    'My cousin passed the {level} exam last year.', 'Do you have flashcards I could use?', 'I travelled to {town} for a wedding.', 'My manager wants me to learn {lang} for work.',
  ],
  replies: ['Try spaced repetition with small daily reviews.', 'Ten new words a day is plenty.', 'That is very normal; keep going.', 'Let us do more speaking next lesson.'],
};

const DOMAINS = [BIKE_SHOP, NURSERY, TUTOR];

function chatterVals(r: Rand): Vals {
  return {
    brand: pick(r, BRANDS), model: pick(r, MODELS), town: pick(r, TOWNS), first: pick(r, FIRST), street: pick(r, STREETS),
    plant: pick(r, PLANTS), lang: pick(r, LANGS), level: pick(r, LEVELS), q: String(2 + Math.floor(r() * 9)), item: pick(r, [...PARTS, ...SUPPLIES]),
  };
}

// ------------------------------------------------------------------ generation

interface Plan {
  at: number;
  kind: 'state' | 'update' | 'update-long' | 'remind';
  fact: number;
}

/** Generates the scenario (see module comment). */
export function generateScenario(options: ScenarioOptions = {}): Scenario {
  const o = { ...SCENARIO_DEFAULTS, ...options };
  const r = prng(o.seed);
  const turns: ScenarioTurn[] = [];
  const probes: ScenarioProbe[] = [];
  for (let s = 0; s < o.sessions; s++) {
    const domain = DOMAINS[s % DOMAINS.length]!;
    const session = `${domain.name}-${String(s + 1).padStart(2, '0')}`;
    const pairs = Math.floor((o.minTurns + Math.floor(r() * (o.maxTurns - o.minTurns + 1))) / 2);
    // Where facts are stated, updated and asked about, in user-turn indexes.
    const facts = domain.facts.map((f) => ({ type: f, vals: f.make(r), stated: '', latest: '', updated: false }));
    const plans: Plan[] = [];
    const used = new Set<number>();
    const slot = (lo: number, hi: number): number => {
      for (;;) {
        const i = lo + Math.floor(r() * Math.max(1, hi - lo));
        if (!used.has(i)) {
          used.add(i);
          return i;
        }
      }
    };
    facts.forEach((f, i) => {
      const at = i === 0 ? slot(0, 3) : slot(1, Math.floor(pairs * 0.6));
      plans.push({ at, kind: 'state', fact: i });
      // A short update ("make it 5 instead") comes within a few turns of what it changes; one long
      // after names its topic ("can we move the delivery to Friday?"), as people do.
      if (f.type.update && r() < 0.6) {
        const long = f.type.update.sayLong !== undefined && r() < 0.6;
        const lo = long ? at + 20 : at + 1;
        plans.push({ at: slot(lo, Math.min(pairs - 2, long ? lo + Math.floor(pairs * 0.3) : at + 6)), kind: long ? 'update-long' : 'update', fact: i });
      }
      if (f.type.remind && r() < 0.5) plans.push({ at: slot(at + 5, pairs - 1), kind: 'remind', fact: i });
    });
    plans.sort((a, b) => a.at - b.at);
    // An update follows its own statement: drop updates planned before or at it.
    const byAt = new Map(plans.map((p) => [p.at, p]));
    let clock = Date.UTC(2025, 2, 3, 9, 0, 0) + s * 3_600_000;
    let day = 0;
    for (let i = 0; i < pairs; i++) {
      // Multi-day: a new day every ~40-120 exchanges.
      if (i > 0 && r() < 1 / 80) {
        day += 1 + Math.floor(r() * 3);
        clock = Date.UTC(2025, 2, 3 + day, 9 + Math.floor(r() * 8), 0, 0);
      }
      clock += 20_000 + Math.floor(r() * 90_000);
      const uid = `u${i + 1}`;
      const p = byAt.get(i);
      let text: string;
      if (p) {
        const f = facts[p.fact]!;
        if (p.kind === 'state') {
          text = fill(pick(r, f.type.state), f.vals);
          f.stated = uid;
          f.latest = uid;
        } else if ((p.kind === 'update' || p.kind === 'update-long') && f.stated) {
          f.vals = { ...f.vals, ...f.type.update!.make(r, f.vals) };
          text = fill(pick(r, p.kind === 'update-long' ? f.type.update!.sayLong! : f.type.update!.say), f.vals);
          f.latest = uid;
          f.updated = true;
        } else if (p.kind === 'remind' && f.stated) {
          text = fill(pick(r, f.type.remind!), f.vals);
        } else {
          text = pick(r, SMALL_TALK);
        }
      } else {
        text = r() < 0.35 ? pick(r, SMALL_TALK) : fill(pick(r, domain.chatter), chatterVals(r));
      }
      turns.push({ session, turn: uid, role: 'user', text, at: new Date(clock).toISOString() });
      clock += 5_000 + Math.floor(r() * 20_000);
      const reply = r() < 0.5 ? pick(r, REPLIES_COMMON) : pick(r, domain.replies);
      turns.push({ session, turn: `a${i + 1}`, role: 'assistant', text: reply, at: new Date(clock).toISOString() });
    }
    for (const f of facts) {
      if (!f.stated) continue;
      const query = fill(pick(r, f.type.ask), f.vals);
      if (f.updated) probes.push({ id: `latest:${session}:${f.type.name}`, session, query, expect: [f.latest] });
      else probes.push({ id: `fact:${session}:${f.type.name}`, session, query, expect: [f.stated] });
    }
  }
  return { turns, probes };
}

/** `npm run bench -- scenario --out DIR [--seed N] [--sessions N]` (see bench/scenario.ts). */
export const scenarioFiles = (dir: string): { transcript: string; probes: string } => ({ transcript: `${dir}/transcript.jsonl`, probes: `${dir}/probes.jsonl` });
