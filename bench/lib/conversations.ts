// Long two-person chit-chat across many dated meetings, with probes that name the turns holding each
// answer: tidemark's own outside-style check of long-conversation recall (replay the turns, ask each
// probe, score whether the expected turn ids come back in the top-k). Deterministic for a given seed.
//
// Facts are told in passing, by both people, in past tense with relative dates, often in reply to the
// other's question or split over a question and its answer; probes paraphrase them, and the facts'
// topic words come back in unrelated turns. Lexical overlap at the defaults (seed 11, measured by
// `lexicalOverlap`; content words are lower-cased tokens minus a small stopword list and the two
// speakers' names): the mean share of a query's content words found in its evidence turns is 0.32
// (exact tokens) / 0.38 (Porter stems), and for 38% / 36% of probes some non-evidence turn holds more
// of them than the best evidence turn, so a keyword match alone does not solve it.

import { stemmer } from 'stemmer';
import { rng } from './stats.js';

export interface ConvTurn {
  session: string;
  /** `D{meeting}:{n}`, unique within the conversation. */
  turn: string;
  role: 'user' | 'assistant';
  /** First name; speaker A has role 'user', speaker B 'assistant'. */
  speaker: string;
  text: string;
  /** ISO-8601. */
  at: string;
}

export interface ConvProbe {
  id: string;
  session: string;
  query: string;
  expect: string[];
  kind: 'single-hop' | 'multi-hop' | 'temporal' | 'update' | 'open';
  /** Words a right answer holds (for temporal probes the resolved date, see `pastDay`). */
  expectText?: string[];
  /** Words of a superseded value a right answer to an update probe must not give. */
  rejectText?: string[];
}

export interface Conversations {
  turns: ConvTurn[];
  probes: ConvProbe[];
}

export interface ConversationOptions {
  /** @default 11 */
  seed?: number;
  /** @default 6 */
  conversations?: number;
  /** Meetings per conversation, drawn uniformly in [minSessions, maxSessions]. @default 18 */
  minSessions?: number;
  /** @default 28 */
  maxSessions?: number;
  /** Turns per meeting, uniformly in [min, max]; below 10 a meeting may run over. @default 16 */
  minTurnsPerSession?: number;
  /** @default 30 */
  maxTurnsPerSession?: number;
}

export const CONVERSATION_DEFAULTS: Required<ConversationOptions> = {
  seed: 11,
  conversations: 6,
  minSessions: 18,
  maxSessions: 28,
  minTurnsPerSession: 16,
  maxTurnsPerSession: 30,
};

type Rand = () => number;
type Vals = Record<string, string>;
type Side = 0 | 1;
type Sex = 'f' | 'm';
type Kind = ConvProbe['kind'];
type Mood = 'good' | 'bad' | 'plain';
type Trait = 'outdoor' | 'creative' | 'music' | 'active' | 'food' | 'dog';

const pick = <T>(r: Rand, xs: readonly T[]): T => xs[Math.floor(r() * xs.length)]!;
const int = (r: Rand, lo: number, hi: number): number => lo + Math.floor(r() * (hi - lo + 1));
const uni = (r: Rand, lo: number, hi: number): number => lo + r() * (hi - lo);
const cap = (s: string): string => s.charAt(0).toUpperCase() + s.slice(1);
const other = (s: Side): Side => (s === 0 ? 1 : 0);

function shuffle<T>(r: Rand, xs: T[]): T[] {
  for (let i = xs.length - 1; i > 0; i--) {
    const j = Math.floor(r() * (i + 1));
    [xs[i], xs[j]] = [xs[j]!, xs[i]!];
  }
  return xs;
}

/** Fills `{key}` slots; a missing value is a template bug, so it throws rather than print "{key}". */
function fill(tpl: string, v: Vals): string {
  return tpl.replace(/\{(\^?)(\w+)\}/g, (_, up: string, k: string) => {
    const x = v[k];
    if (x === undefined) throw new Error(`conversations: no value for {${k}} in "${tpl}"`);
    return up ? cap(x) : x;
  });
}

/** Every probe points at turns that really hold its answer: a template that drops a value is caught here. */
function holds(text: string, v: Vals, keys: readonly string[], what: string): void {
  const t = text.toLowerCase();
  for (const k of keys) {
    const x = v[k];
    if (x === undefined || !t.includes(x.toLowerCase())) throw new Error(`conversations: ${what} "${text}" lacks {${k}}=${x}`);
  }
}

const PRON: Record<Sex, { he: string; him: string; his: string }> = {
  f: { he: 'she', him: 'her', his: 'her' },
  m: { he: 'he', him: 'him', his: 'his' },
};

/** A third person's name and pronouns under one prefix: {sib}, {sibhe}, {sibHe}, {sibhim}, {sibhis}. */
function them(key: string, name: string, sex: Sex): Vals {
  const p = PRON[sex];
  return { [key]: name, [`${key}he`]: p.he, [`${key}He`]: cap(p.he), [`${key}him`]: p.him, [`${key}his`]: p.his };
}

// ------------------------------------------------------------------ dates
//
// Resolution rule for relative dates (the probes' expectText and the unit test both follow it). D is
// the UTC calendar date of the turn's `at`:
//   "this morning", "earlier today" -> D (only said at or after noon)
//   "yesterday" -> D-1; "the day before yesterday" -> D-2; "three|four|five days ago" -> D-3|4|5
//   "last <Weekday>" -> the latest date before D on that weekday; only said when that is 2-6 days back,
//     so it never means yesterday nor the week before
//   "last month" -> the calendar month before D's; "back in <Month>" -> the latest such month before
//     D's, 2-4 months back; "next month" -> the calendar month after D's ("May 2025")
// Vaguer phrases ("last weekend", "the other day", "a couple of weeks ago", "in a few weeks") are
// used too, but never asked about as a date.

const WEEKDAYS = ['Sunday', 'Monday', 'Tuesday', 'Wednesday', 'Thursday', 'Friday', 'Saturday'];
const MONTHS = ['January', 'February', 'March', 'April', 'May', 'June', 'July', 'August', 'September', 'October', 'November', 'December'];
const NUMBER = ['zero', 'one', 'two', 'three', 'four', 'five', 'six'];
const DAY_MS = 86_400_000;
const isoDate = (t: number): string => new Date(t).toISOString().slice(0, 10);
const monthOf = (y: number, m: number): string => {
  const d = new Date(Date.UTC(y, m, 1));
  return `${MONTHS[d.getUTCMonth()]!} ${d.getUTCFullYear()}`;
};

interface When {
  text: string;
  /** Resolved day, YYYY-MM-DD. */
  iso?: string;
  /** Resolved month, "May 2025". */
  month?: string;
}
type WhenKind = 'day' | 'month' | 'next';

interface Meet {
  k: number;
  /** Midnight UTC of the meeting's day. */
  day: number;
  hour: number;
}

/** `evening`: an evening or all-day event (a gig, a dinner party), never "this morning". */
function pastDay(r: Rand, m: Meet, evening = false): When {
  const dow = new Date(m.day).getUTCDay();
  const x = r();
  if (x < 0.2) return { text: 'yesterday', iso: isoDate(m.day - DAY_MS) };
  if (x < 0.26) return { text: 'the day before yesterday', iso: isoDate(m.day - 2 * DAY_MS) };
  if (x < 0.38) {
    const n = int(r, 3, 5);
    return { text: `${NUMBER[n]!} days ago`, iso: isoDate(m.day - n * DAY_MS) };
  }
  if (x < 0.7) {
    const back = int(r, 2, 6);
    return { text: `last ${WEEKDAYS[(dow - back + 7) % 7]!}`, iso: isoDate(m.day - back * DAY_MS) };
  }
  if (x < 0.78 && m.hour >= 12 && !evening) return { text: pick(r, ['this morning', 'earlier today']), iso: isoDate(m.day) };
  return { text: pick(r, ['last weekend', 'the other day', 'a couple of weeks ago', 'a few weeks back']) };
}

function pastMonth(r: Rand, m: Meet): When {
  const d = new Date(m.day);
  const y = d.getUTCFullYear();
  const mo = d.getUTCMonth();
  const x = r();
  if (x < 0.55) return { text: 'last month', month: monthOf(y, mo - 1) };
  if (x < 0.82) {
    const back = int(r, 2, 4);
    return { text: `back in ${MONTHS[(mo - back + 12) % 12]!}`, month: monthOf(y, mo - back) };
  }
  return { text: pick(r, ['a while back', 'a few months ago']) };
}

function when(r: Rand, m: Meet, kind: WhenKind, evening = false): When {
  if (kind === 'day') return pastDay(r, m, evening);
  if (kind === 'month') return pastMonth(r, m);
  const d = new Date(m.day);
  return r() < 0.85 ? { text: 'next month', month: monthOf(d.getUTCFullYear(), d.getUTCMonth() + 1) } : { text: 'in a few weeks' };
}

// ------------------------------------------------------------------ invented people, places, things

const SPEAKERS: readonly (readonly [string, Sex])[] = [
  ['Maren', 'f'], ['Kofi', 'm'], ['Ilsa', 'f'], ['Teodor', 'm'], ['Delphine', 'f'], ['Ansel', 'm'], ['Fenna', 'f'],
  ['Caspian', 'm'], ['Halia', 'f'], ['Eamon', 'm'], ['Kesia', 'f'], ['Galen', 'm'], ['Mireille', 'f'], ['Ivo', 'm'],
  ['Odalys', 'f'], ['Lucan', 'm'], ['Rosalind', 'f'], ['Niko', 'm'], ['Talia', 'f'], ['Pavel', 'm'], ['Vesna', 'f'],
  ['Soren', 'm'], ['Saskia', 'f'], ['Ulric', 'm'], ['Yara', 'f'], ['Zeno', 'm'], ['Anouk', 'f'], ['Bastian', 'm'],
  ['Cerys', 'f'], ['Dario', 'm'], ['Elowen', 'f'], ['Florin', 'm'], ['Greta', 'f'], ['Hollis', 'm'], ['Isolde', 'f'],
  ['Jasper', 'm'], ['Linnea', 'f'], ['Nadim', 'm'], ['Oona', 'f'], ['Perrin', 'm'], ['Tamsin', 'f'], ['Idris', 'm'],
];

/** Family and friends; never a speaker's name, so a query naming a speaker is never about them. */
const THIRDS: readonly (readonly [string, Sex])[] = [
  ['Ana', 'f'], ['Jonah', 'm'], ['Lotte', 'f'], ['Milo', 'm'], ['Rhea', 'f'], ['Otis', 'm'], ['Juno', 'f'], ['Felix', 'm'],
  ['Esme', 'f'], ['Arlo', 'm'], ['Nell', 'f'], ['Rufus', 'm'], ['Iris', 'f'], ['Tobin', 'm'], ['Maud', 'f'], ['Silas', 'm'],
  ['Clio', 'f'], ['Ezra', 'm'], ['Pia', 'f'], ['Hugo', 'm'], ['Dorit', 'f'], ['Alfie', 'm'], ['Freya', 'f'], ['Cormac', 'm'],
  ['Sunniva', 'f'], ['Gus', 'm'], ['Beatrix', 'f'], ['Lars', 'm'], ['Romilly', 'f'], ['Ned', 'm'], ['Zadie', 'f'],
  ['Kasimir', 'm'], ['Mabel', 'f'], ['Wilf', 'm'], ['Ottilie', 'f'], ['Rowan', 'm'], ['Theo', 'm'], ['Agnes', 'f'],
];

const PET_NAMES = ['Biscuit', 'Pudding', 'Mochi', 'Tofu', 'Nutmeg', 'Clementine', 'Sprout', 'Marmalade', 'Fig', 'Pistachio', 'Custard', 'Crumpet', 'Maple', 'Dumpling', 'Bramble', 'Pebble', 'Turnip', 'Sausage'];

interface Species {
  kind: string;
  young: string;
  breeds: readonly string[];
  mess: readonly string[];
}
const DOG: Species = {
  kind: 'dog', young: 'puppy',
  breeds: ['beagle mix', 'border collie', 'scruffy little terrier', 'rescue greyhound', 'spaniel cross'],
  mess: ['ate an entire sock', 'stole a sandwich off the counter', 'barked at the postman for ten minutes straight', 'rolled in something disgusting at the park'],
};
const CAT: Species = {
  kind: 'cat', young: 'kitten',
  breeds: ['ginger tabby', 'fluffy grey longhair', 'black cat with one white paw', 'tortoiseshell'],
  mess: ['knocked my plant off the windowsill', 'sat on my keyboard in the middle of a call', 'brought a live frog into the kitchen', 'knocked a full glass of water over'],
};
const RABBIT: Species = {
  kind: 'rabbit', young: 'bunny',
  breeds: ['lop-eared rabbit', 'tiny dwarf rabbit', 'big grey rabbit'],
  mess: ['chewed through my phone charger', 'dug a hole in the sofa cushion', 'escaped into the garden again'],
};
const TORTOISE: Species = {
  kind: 'tortoise', young: 'baby tortoise',
  breeds: ['spur-thighed tortoise', 'very old tortoise, older than me'],
  mess: ['escaped under the fence again', 'ate all the strawberries in the garden'],
};

const TOWNS = ['Fellbrook', 'Wexmoor', 'Calderwick', 'Brindlemoor', 'Oakhollow', 'Saltmere', 'Dunhallow', 'Marrowby', 'Kestrelford', 'Ebbington', 'Hollinsgate', 'Tarrowmouth', 'Larchmere', 'Pellow Cross', 'Vennick', 'Audley Fen', 'Ravensholt', 'Cobbleford', 'Merrowdale', 'Skelby'];
const HOLIDAY_PLACES = ['the Isle of Tarran', 'Port Averly', 'Vellan Cove', 'Skerrick Point', 'the Fennick Dunes', 'Old Harrowmere', 'Brisa Alta', 'Lake Ormsby'];
const CAMP_PLACES = ['Lake Sennet', 'the Corrin Hills', 'Fennick Woods', 'Gallow Tarn', 'the Ashby Downs', 'Morwen Bay'];

interface Job { company: string; word: string; role: string; roleWord: string; gripe: string; joke: string }
const JOBS: readonly Job[] = [
  { company: 'Harrowgate Logistics', word: 'Harrowgate', role: 'a dispatcher', roleWord: 'dispatcher', gripe: 'half the drivers called in sick', joke: 'I shout at lorries all day' },
  { company: 'Tillbrook Studios', word: 'Tillbrook', role: 'a graphic designer', roleWord: 'designer', gripe: 'a client changed the logo brief for the fourth time', joke: 'I make things slightly bigger and then slightly smaller again' },
  { company: 'Quillfeather Press', word: 'Quillfeather', role: 'a copy editor', roleWord: 'editor', gripe: 'three manuscripts landed on my desk at once', joke: 'I argue with authors about commas' },
  { company: 'Marrowick Greenhouses', word: 'Marrowick', role: 'a horticulturist', roleWord: 'horticulturist', gripe: 'the heating failed in the tomato house', joke: 'I talk to plants professionally' },
  { company: 'Ferrowby Insurance', word: 'Ferrowby', role: 'a claims handler', roleWord: 'claims', gripe: 'everyone who owns a shed filed a storm claim at once', joke: 'people tell me about their burst pipes all day' },
  { company: 'Bramblecote Dental', word: 'Bramblecote', role: 'a dental hygienist', roleWord: 'hygienist', gripe: 'we were double-booked all afternoon', joke: 'I ask people questions while their mouth is full of instruments' },
  { company: 'Vennholt Engineering', word: 'Vennholt', role: 'a structural engineer', roleWord: 'engineer', gripe: 'the crane on site broke down again', joke: 'I make sure bridges stay up' },
  { company: 'Larkspur Lane Vets', word: 'Larkspur', role: 'a veterinary nurse', roleWord: 'veterinary', gripe: 'we had four emergency cats before lunch', joke: 'I get bitten by very small dogs' },
  { company: 'Cindermoor Games', word: 'Cindermoor', role: 'a game artist', roleWord: 'artist', gripe: 'we are three weeks from a deadline and nothing works', joke: 'I draw trees for a living' },
  { company: 'Pellingham Surveying', word: 'Pellingham', role: 'a land surveyor', roleWord: 'surveyor', gripe: 'I spent six hours in a muddy field in the rain', joke: 'I stand in fields holding a very expensive stick' },
  { company: 'Hembury & Finch', word: 'Hembury', role: 'an accountant', roleWord: 'accountant', gripe: 'nobody has sent me their receipts and the deadline is Friday', joke: 'I chase people for receipts' },
  { company: 'Glasswick Labs', word: 'Glasswick', role: 'a lab technician', roleWord: 'technician', gripe: 'a freezer alarm went off at six in the morning', joke: 'I label very small tubes' },
  { company: 'Thistlecombe House', word: 'Thistlecombe', role: 'a care worker', roleWord: 'care worker', gripe: 'we were two staff short on the early shift', joke: 'I play a lot of dominoes with people in their nineties' },
  { company: 'Halvard Freight', word: 'Halvard', role: 'a warehouse supervisor', roleWord: 'warehouse', gripe: 'the scanners went down for the whole afternoon', joke: 'I count boxes and then count them again' },
  { company: 'Orrin & Pike Architects', word: 'Orrin', role: 'an architect', roleWord: 'architect', gripe: 'the planning office sent our drawings back again', joke: "I draw houses nobody can afford" },
];

const KIN_JOBS: readonly { job: string; word: string; hint: string }[] = [
  { job: 'a nurse', word: 'nurse', hint: "works nights on the children's ward" },
  { job: 'a primary school teacher', word: 'teacher', hint: 'has a class of thirty six-year-olds' },
  { job: 'a firefighter', word: 'firefighter', hint: 'is on call half the week' },
  { job: 'a paramedic', word: 'paramedic', hint: 'does twelve-hour shifts on the ambulances' },
  { job: 'a chef', word: 'chef', hint: 'runs the kitchen at a little bistro' },
  { job: 'an electrician', word: 'electrician', hint: 'rewires old houses, mostly' },
  { job: 'a librarian', word: 'librarian', hint: "runs the children's reading hour" },
  { job: 'a midwife', word: 'midwife', hint: 'has delivered something like four hundred babies' },
  { job: 'a physiotherapist', word: 'physiotherapist', hint: "spends all day fixing footballers' knees" },
  { job: 'a park ranger', word: 'ranger', hint: 'spends all day outdoors with a radio' },
  { job: 'a bus driver', word: 'bus driver', hint: 'does the early route into town' },
  { job: 'a plumber', word: 'plumber', hint: "is permanently under someone's sink" },
];

const BANDS = ['The Lantern Thieves', 'Marigold Static', 'Halfmoon Parade', 'The Velvet Ferns', 'Copper Gulls', 'Glass Orchard', 'The Quiet Tigers', 'Low Tide Radio'];
const QUIZ_TEAMS = ['The Know-It-Owls', 'The Smarty Parsnips', 'The Lost Marbles', 'The Clueless Herons', 'Table Six and a Half', 'The Quizzly Bears'];
const DISHES: readonly (readonly [string, string])[] = [['a huge mushroom risotto', 'risotto'], ['a spicy bean stew', 'stew'], ['aubergine lasagne', 'lasagne'], ['a tray of homemade pierogi', 'pierogi'], ['a giant leek pie with a wonky lid', 'pie']];
const GIFTS: readonly (readonly [string, string])[] = [['tickets to a comedy night', 'comedy'], ['a hot air balloon ride', 'balloon'], ['a surprise trip to the seaside', 'seaside'], ['a really fancy bread knife', 'knife'], ['a day at a spa', 'spa']];
const PASTIMES: readonly (readonly [string, string])[] = [['bell ringing', 'bell'], ['beekeeping', 'beekeeping'], ['competitive crosswords', 'crosswords'], ['ballroom dancing', 'ballroom'], ['restoring old clocks', 'clocks']];
const COLOURS: readonly (readonly [string, string])[] = [['a dark forest green', 'green'], ['sunflower yellow', 'yellow'], ['a dusty pink', 'pink'], ['deep navy blue', 'navy'], ['terracotta', 'terracotta']];
const DRINKS: readonly (readonly [string, string])[] = [['pot of green tea', 'green tea'], ['oat flat white', 'flat white'], ["mug of builder's tea", "builder's tea"], ['double espresso', 'espresso'], ['hot lemon water', 'lemon water'], ['glass of beetroot juice', 'beetroot'], ['mug of chicory coffee', 'chicory']];
const FOODS = ['coriander', 'olives', 'mushrooms', 'blue cheese', 'raisins', 'aubergine'];
const CUISINES: readonly (readonly [string, string])[] = [['dumplings', 'dumplings'], ['a good curry', 'curry'], ['Georgian food', 'Georgian'], ['pho', 'pho'], ['tacos', 'tacos'], ['Ethiopian food', 'Ethiopian']];
const SEASONS = ['autumn', 'winter', 'spring', 'summer'];
const ALLERGENS = ['cats', 'horses', 'dust', 'feathers'];
const SHOWS = ['Gull Street', 'The Quiet Acre', 'Moth and Lantern', 'The Gravel Years', 'Nine Kettles', 'Saltwater Row'];

// ------------------------------------------------------------------ hobbies

interface Hobby {
  id: string;
  /** The distinctive word, a substring of noun, habit and did (an expectText). */
  word: string;
  /** As in "really into {noun}". */
  noun: string;
  /** Said as "{habit} on Tuesdays". */
  habit: string;
  /** First time, past tense: "I {did} yesterday". */
  did: string;
  /** Query paraphrase of the first time: "When did Maren {first}?" */
  first: string;
  /** Query paraphrase of the activity. */
  alt: string;
  q: string;
  a: string;
  xs: readonly string[];
  /** Query about {x}, paraphrased. */
  probe: string;
  traits: readonly Trait[];
}

const HOBBIES: readonly Hobby[] = [
  { id: 'pottery', word: 'pottery', noun: 'pottery', habit: 'I go to pottery', did: 'went to my first pottery class', first: 'first try ceramics', alt: 'ceramics', q: 'What did you make?', a: "A very wonky {x}. It leaks a bit, but it's mine.", xs: ['mug', 'little bowl', 'plant pot', 'vase'], probe: 'What did {P} make at {his} first ceramics session?', traits: ['creative'] },
  { id: 'bouldering', word: 'bouldering', noun: 'bouldering', habit: 'I go bouldering', did: 'tried bouldering for the first time', first: 'go indoor climbing for the first time', alt: 'climbing', q: 'Was it scary?', a: 'Less than I expected! I got up {x} by the end. My forearms are dead though.', xs: ['three routes', 'four routes', 'five routes'], probe: 'How many routes did {P} manage on {his} first climbing visit?', traits: ['active'] },
  { id: 'choir', word: 'choir', noun: 'choir singing', habit: 'I have choir practice', did: 'joined a community choir', first: 'join a singing group', alt: 'singing', q: 'What are you singing?', a: 'Mostly old folk songs, and {x} for the winter concert.', xs: ['a sea shanty medley', 'a lullaby in four parts', 'a very long hymn'], probe: "What is {P}'s singing group rehearsing for the winter show?", traits: ['music'] },
  { id: 'birds', word: 'birdwatching', noun: 'birdwatching', habit: 'I go birdwatching at the reservoir', did: 'went birdwatching on a guided walk at the wetlands', first: 'first go out birding', alt: 'birding', q: 'See anything good?', a: "A {x}! Apparently they're really rare round here.", xs: ['kingfisher', 'marsh harrier', 'pair of avocets', 'bittern'], probe: 'Which uncommon species did {P} see at the wetlands?', traits: ['outdoor'] },
  { id: 'sourdough', word: 'sourdough', noun: 'sourdough baking', habit: 'I do my big sourdough bake', did: 'baked my first sourdough loaf', first: 'bake {his} first loaf of bread', alt: 'bread-making', q: 'How did it turn out?', a: "Flat as a pancake, but delicious. I've named the starter {x}.", xs: ['Bubbles', 'Old Faithful', 'Doughris', 'Sir Rises'], probe: 'What name did {P} give the bread starter?', traits: ['food'] },
  { id: 'chess', word: 'chess', noun: 'chess', habit: 'I play chess at the library club', did: 'went to the chess club at the library for the first time', first: 'first show up at the library club', alt: 'strategy games', q: 'Did you win any games?', a: "I won {x} out of five. I'm calling that a success.", xs: ['two', 'three', 'one'], probe: 'How many games did {P} win on {his} first club night?', traits: [] },
  { id: 'kayak', word: 'kayak', noun: 'kayaking', habit: 'I take the kayak out on the river', did: 'went kayaking for the first time', first: 'first go paddling on the river', alt: 'paddling', q: 'Did you fall in?', a: 'Only once! We paddled all the way to {x} and back.', xs: ['the old mill', 'the weir', 'the railway bridge'], probe: 'How far up the river did {P} paddle on that first outing?', traits: ['outdoor', 'active'] },
  { id: 'knitting', word: 'knit', noun: 'knitting', habit: 'I knit with a group at the café', did: 'went to my first knitting circle', first: 'join a needlework circle', alt: 'needlework', q: 'What are you making?', a: "A {x} for my niece. It's taking forever.", xs: ['scarf', 'tiny hat', 'blanket', 'cardigan'], probe: 'What is {P} making for {his} niece?', traits: ['creative'] },
  { id: 'trail', word: 'trail running', noun: 'trail running', habit: 'I go trail running with a club', did: 'joined a trail running group', first: 'join the off-road running group', alt: 'off-road running', q: 'How far did you go?', a: 'About {x} kilometres, mostly uphill. I nearly cried.', xs: ['eight', 'ten', 'six', 'twelve'], probe: 'What distance did {P} cover with the running group the first time?', traits: ['outdoor', 'active'] },
  { id: 'allotment', word: 'allotment', noun: 'allotment gardening', habit: "I'm down at the allotment", did: 'finally got an allotment plot', first: 'get a vegetable plot', alt: 'vegetable growing', q: 'What are you growing?', a: '{x} mostly, and some flowers for the bees.', xs: ['courgettes', 'runner beans', 'potatoes', 'tomatoes'], probe: 'What is {P} growing on the new plot?', traits: ['outdoor'] },
  { id: 'watercolour', word: 'watercolour', noun: 'watercolour painting', habit: 'I go to a watercolour group', did: 'went to a watercolour workshop', first: 'first try painting', alt: 'painting', q: 'What did you paint?', a: '{x}. It looks like a puddle, but the teacher was kind about it.', xs: ['a lighthouse', 'the harbour', 'a bowl of lemons'], probe: "What was the subject of {P}'s first painting?", traits: ['creative'] },
  { id: 'salsa', word: 'salsa', noun: 'salsa dancing', habit: 'I go to salsa', did: 'went to my first salsa class', first: 'have {his} first dancing lesson', alt: 'dancing', q: 'Did you step on anyone?', a: 'Constantly! The man I was paired with had been dancing for {x} years and was very patient.', xs: ['thirty', 'twenty', 'forty'], probe: "How long had {P}'s dance partner at the first lesson been dancing?", traits: ['active', 'music'] },
  { id: 'wood', word: 'wood', noun: 'woodworking', habit: 'I do woodwork at the community workshop', did: 'made my first bit of woodwork', first: 'make {his} first piece of furniture', alt: 'carpentry', q: 'What did you build?', a: 'A {x}! It wobbles, but it stands.', xs: ['bird box', 'little stool', 'bookshelf'], probe: 'What did {P} build in {his} first carpentry attempt?', traits: ['creative'] },
  { id: 'swim', word: 'swim', noun: 'wild swimming', habit: 'I swim in the lake with a group', did: 'went wild swimming for the first time', first: 'first swim outdoors', alt: 'open-water dips', q: "Wasn't it freezing?", a: 'Absolutely freezing. The water was {x} degrees, apparently.', xs: ['eleven', 'nine', 'thirteen'], probe: "How cold was the water on {P}'s first outdoor dip?", traits: ['outdoor', 'active'] },
  { id: 'ukulele', word: 'ukulele', noun: 'ukulele playing', habit: 'I have my ukulele lesson', did: 'bought a ukulele and started teaching myself', first: 'start learning a small stringed instrument', alt: 'a stringed instrument', q: 'Can you play anything yet?', a: 'Just {x}, badly.', xs: ['three chords', 'one sea shanty', 'a very slow lullaby'], probe: 'What can {P} play on the new instrument so far?', traits: ['music'] },
  { id: 'photo', word: 'photograph', noun: 'film photography', habit: 'I go out photographing the harbour', did: 'bought an old film camera and started photographing everything', first: 'start shooting on film', alt: 'taking pictures on film', q: 'Have you developed any yet?', a: 'The first roll came back and {x} of them were blurry.', xs: ['half', 'most', 'about ten'], probe: "How many of {P}'s first film shots came out blurry?", traits: ['creative'] },
];

const hobbyVals = (h: Hobby): Vals => ({ word: h.word, noun: h.noun, habit: h.habit, did: h.did, alt: h.alt });

const HOBBY_DISTRACT = [
  "My cousin is really into {noun} now, it's all she talks about.|Ha, everyone has a cousin like that.",
  "There's a group for {noun} that meets near the station, I keep walking past it.|Ha, go in one day!",
  'I watched a video about {noun} last night, weirdly relaxing.|The internet is full of those.',
  'Someone at work does {noun} and brought in photos. Very wholesome.|Aww.',
  'Is {noun} the kind of thing people do to meet people? My neighbour says it is.|Probably! Everything is these days.',
];
const DAY_DISTRACT = [
  '{day}s are always the busiest day at work for some reason.|Ha, same. No idea why.',
  'My neighbour says {day} evenings are for laundry and nothing else.|Sounds about right.',
  'The bins get collected on {day}s here and they wake the whole street.|So loud!',
];

// ------------------------------------------------------------------ chat furniture

const GREET_MORNING = ['Morning {you}!', 'Morning! How are you?', 'Hey {you}, good morning!'];
const GREET_EVENING = ['Evening {you}! How was your day?', 'Hey, you around tonight?', 'Evening!'];
const GREET = ['Hey {you}!', "Hi {you}! How's it going?", 'Heyyy, how are you?', 'Hello stranger!', "{you}! How's your week been?", 'Hiya! Got a minute?', 'Hi! Sorry I went quiet for a bit.', 'Hey hey!', 'Hi {you}!'];
const GREET_BACK = ['Hey! Good thanks, bit tired. You?', 'Hi! All good here. How are you?', 'Heyy! Not bad at all. You?', 'Hello! Surviving, just about. How about you?', 'Hey {you}! Yeah, all good. You?', 'Hiya! Busy week, but good. You?', "Hey you! I'm alright. How's things?", 'Hey! Yes, here. How are you doing?'];
const GREET_THIRD = ["Good, good. Can't complain.", 'Not bad! Busy, but fine.', 'Pretty good actually!', 'Tired, but in a good way.', 'Yeah, fine! Same old.', 'All good here, thanks!', "I'm alright! Better now it's nearly the weekend."];
const SIGN_OFF = ['I have to run, but this was nice. Speak soon!', 'Okay, my battery is about to die. Chat later!', 'Anyway, I should get back to it. Bye for now!', "Oops, I'm late. Catch you later!", "Okay, I'll let you go. Talk soon x", 'Right, the washing machine is beeping at me. Speak soon!', 'Anyway, lovely to catch up. Speak soon!'];
const SIGN_OFF_WORK = ['Right, back to work before someone notices. Bye!', 'I need to go and be productive. Talk later!'];
const SIGN_OFF_LUNCH = ['My lunch break is nearly over, speak soon!', 'Lunch is over, sadly. Speak soon!'];
const SIGN_OFF_EVENING = ["Anyway, I'd better get dinner on. Talk soon!", 'Okay, sofa and telly are calling. Speak soon!', 'Right, dinner time. Talk soon!'];
const SIGN_OFF_NIGHT = ["Right, I'm off to bed. Night!", "I'm going to try for an early night. Night night!", 'Okay, sofa and telly are calling. Night!'];
const SIGN_BACK = ['Bye! Have a good one.', 'Speak soon!', 'Talk later!', 'Bye {you}!', 'Take care! x', 'Laters!', 'Bye bye!'];
const SIGN_BACK_EVENING = ['Night! Sleep well.', 'Night night!', 'Enjoy your evening!'];
const SIGN_BACK_HI = ['Bye! Say hi to {name} for me.', 'Speak soon! Love to {name}.', 'Bye! Give {name} a hug from me.'];

// Asked after the greeting has already covered "how are you", so these ask for news instead.
const PROMPTS = ["So what's new with you?", 'How was your weekend?', 'What have you been up to?', 'Any news?', "What's the latest with you?", 'How has your week been?', 'What else is going on with you?', 'Anything exciting happening?', "What's been going on with you?"];
const PROMPTS_GOOD = [...PROMPTS, 'Tell me something good, I need it.', 'You sound cheerful. What happened?', 'Go on, any gossip?'];
const PROMPTS_BAD = ['How are you doing, really?', 'You okay? You seemed a bit quiet.', "How's your week been?"];
const SEGUES = ['Oh, I meant to tell you!', 'Oh! Before I forget.', 'Okay, news.', 'So, update from me.', 'Ooh, I have news.'];
const REACT: Record<Mood, readonly string[]> = {
  good: ['Oh wow!', 'No way!', "Ahh, that's brilliant!", 'Oh nice!', "That's so cool!", 'Amazing!', 'Yay!!', 'Oh I love that.', 'Get you!', 'Ooh, exciting!'],
  bad: ['Oh no!', "Ugh, that's rubbish.", "Oh no, I'm sorry.", 'Ouch.', 'Oh god.', 'Nooo.'],
  plain: ['Ha, nice.', 'Oh fun.', 'Ooh.', 'Oh really?', 'Ha, fair enough.', 'Oh yeah?', "Huh, I didn't know that.", 'Haha.', 'Ha, love that.'],
};
const AFTER: Record<Mood, readonly string[]> = {
  good: ['Haha, amazing.', "Honestly, that's brilliant.", 'Love it.', 'Ha, brilliant.', 'Oh I love that.', 'Amazing.'],
  bad: ['Poor you.', 'Sending hugs.', 'Look after yourself!', "That's rough."],
  plain: ['Ha, fair.', 'Makes sense.', 'Love that.', 'Ha!', "That's so you.", 'Haha, classic.'],
};
/** One-liners that fit after almost anything, to pad a meeting by a single turn. */
const FILLERS = ['Haha, anyway.', 'Right, anyway!', 'Haha.', 'Okay, anyway...', 'Ha!', 'Anyway!'];
const DISTRACT_REPLY = ['Ha, yeah.', 'Oh really?', 'Classic.', 'Honestly, fair.', 'No way.', "That's so funny.", 'Mm, I get that.', 'Wild.', 'Ha, I can imagine.', 'Oh god, yes.'];

/** Exchanges that carry no fact about anyone: the filler of real chit-chat. */
const SMALL_TALK: readonly (readonly string[])[] = [
  ['Is it just me or has this week lasted about a month?', "Not just you. It's been endless."],
  ['The weather is so confused at the moment.', 'I know! I wore a coat this morning and boiled by lunch.'],
  ['I need a holiday. Or a very long nap.', 'Honestly, both.'],
  ['Did you see the moon last night? It was huge.', 'Yes! I tried to take a photo and it came out as a tiny blurry dot.'],
  ['My phone screen cracked again.', 'Nooo. Again?!', 'Again. Face down on the pavement.'],
  ['I finally cleaned out the fridge.', 'Honestly, that counts as a big achievement.'],
  ['Have you been watching anything good?', "I started {show}. It's so silly but I'm hooked."],
  ['Why is everything so expensive now?', "Don't. I paid a small fortune for a sandwich today."],
  ['I keep meaning to read more and then I just scroll instead.', 'Same. My phone is a black hole.'],
  ['I had cereal for dinner, no regrets.', 'Honestly, a classic.'],
  ['There was a fox in the garden last night, just staring at me.', 'Haha, it was judging you.'],
  ['Our internet went down for three hours.', 'Oh god, what did you even do?', 'Stared at the wall, mostly.'],
  ['I tried a new recipe and it was a disaster.', 'Haha, what happened?', "Let's just say the smoke alarm got involved."],
  ['My neighbour has started playing the trumpet.', 'Oh no. Is he any good?', 'He is getting there. Slowly.'],
  ['I need new shoes, mine have a hole in.', 'Treat yourself!'],
  ['Do you ever just sit in the car for ten minutes before going inside?', "All the time. It's the only quiet place."],
  ["I've been sleeping so badly.", "Ugh, that's the worst. Have you tried no screens before bed?", 'I have tried. I have failed.'],
  ['Random question: sweet or savoury breakfast?', 'Savoury, always. You?', 'Sweet. We can still be friends.'],
  ['The bus was so late today I nearly walked.', 'Classic.'],
  ['I found a tenner in an old coat pocket!', 'Best feeling in the world.'],
  ['Everyone around me has a cold.', 'Stay away from them!'],
  ['I have forty unread emails and I refuse to look.', 'Relatable.'],
  ['I got stuck talking to a man about gutters for twenty minutes.', 'Haha, did you learn anything?', 'More than I ever wanted to know.'],
  ['Do you think pineapple belongs on pizza?', 'Yes, and I will not apologise.'],
  ['I walked into a door today. In front of people.', 'Nooo, haha. Are you alright?', 'Only my pride is hurt.'],
  ['Is it too early to think about what to have for tea?', 'Never too early.'],
  ['The seagulls round here are getting bolder.', 'One stole a whole chip off my fork once.'],
  ['I reorganised my bookshelf by colour.', 'That sounds very satisfying.'],
  ['I just remembered something embarrassing from ten years ago.', 'Haha, why does the brain do that?'],
  ["I love it when it rains and you don't have to go anywhere.", 'Best feeling.'],
  ['I tried to fix the shower myself.', 'How did that go?', 'We now have a slightly different leak.'],
  ['Have you ever had a dream so real you were annoyed at someone the next day?', 'Yes! My brain is a liar.'],
  ['The queue at the post office was out the door.', "It's always like that."],
  ['My laptop is making a strange whirring noise.', 'That sounds expensive.'],
  ['I just spent an hour looking for my glasses. They were on my head.', 'Haha, classic.'],
  ['Why do I always remember what I came into a room for once I leave it?', 'The doorway wipes your brain. Science.'],
  ["I've had the same song stuck in my head since Tuesday.", 'Oh no, which one?', "That's the worst part, I don't even know."],
  ['Okay, serious question. Is a hot dog a sandwich?', 'Absolutely not.'],
  ["It's so windy here, my bins ended up two gardens down.", 'Haha, free-range bins.'],
  ['Did you ever finish {show}?', 'Not yet! No spoilers.'],
  ['I bought a new plant and it has already dropped three leaves.', 'It is settling in. Give it time.'],
  ['Why does every app want me to make an account now?', 'I know! I just want to order a pizza.'],
  ['My neighbour has a new car alarm and it goes off every time a leaf lands on it.', 'Oh no, every leaf?', 'Every single leaf.'],
  ['I ran for the bus today and missed it by about a second.', 'The driver definitely saw you.'],
  ['Someone left a whole sofa on the pavement outside my building.', 'Ha, free sofa!'],
  ['I have started talking to my houseplants. Is that normal?', 'Completely normal. They appreciate it.'],
  ['The supermarket has moved everything around again.', 'Why do they do that?!', 'To make us buy more, apparently.'],
  ['I just ate an entire packet of biscuits without noticing.', 'Happens to the best of us.'],
  ['Our street has a new cat that visits every house for food.', 'Haha, a professional.'],
  ['I tried a yoga video and pulled something in my neck.', 'Nooo. Gentle yoga is a lie.'],
  ['My umbrella turned inside out on the way home.', 'Ha, the classic umbrella betrayal.'],
  ['I have been on hold with the bank for forty minutes.', 'Oh god, the hold music must be burned into your brain.'],
  ['I made soup and it tastes exactly like hot water.', 'Add more salt. Always more salt.'],
  ['My downstairs neighbour is baking something amazing and I can smell it through the floor.', 'Go and knock!', 'I am considering it.'],
  ['I went to the shop for milk and came back with everything except milk.', 'Haha, every time.'],
  ['Is it just me or are the days getting longer?', 'They are, finally.'],
  ['I finally fixed the wobbly table with a folded-up envelope.', 'Engineering genius.'],
  ['My phone autocorrected my own name today.', 'Haha, rude.'],
  ['There is a pigeon that sits on my windowsill every morning and stares in.', 'It is keeping an eye on you.'],
  ['I spilled tea all over my notes this morning.', 'Nooo. Could you save them?', 'Mostly. They smell of tea now.'],
  ["I've started making lists of my lists.", 'That is very you.'],
  ['Why is the hot water always either lava or ice?', 'There is no in-between, ever.'],
  ["I've got so much laundry I could build a fort.", 'Honestly, build the fort.'],
  ['Do you ever buy a vegetable with good intentions and then watch it slowly die in the fridge?', 'Every single week.'],
  ['I accidentally replied-all to a whole department today.', 'Nooo. What did it say?', 'Just "lol". That was it.'],
  ['My neighbour waved at me and I waved back, but she was waving at the person behind me.', 'Haha, the worst.'],
  ["I can't believe how fast this year is going.", "I know. It's terrifying."],
  ['Someone on the train was eating a whole roast dinner out of a box.', 'Respect, honestly.'],
  ['I tried to be healthy and ate a salad. I am now starving.', 'Classic salad betrayal.'],
  ['My glasses keep steaming up every time I go inside.', 'The struggle is real.'],
  ['There was a double rainbow earlier, I stopped in the street to look.', 'Ooh, lucky!'],
  ["I've lost the TV remote again.", 'Check the fridge. Mine was in the fridge once.', 'Why was it in the fridge?!'],
  ['I spent twenty minutes choosing a film and then fell asleep in the first ten.', 'Haha, every time.'],
  ['The man in the flat upstairs has started learning to tap dance. At least I think that is what it is.', 'Haha, oh no.'],
  ['Why do birthday cards cost so much now?', 'I know, I just draw my own now.'],
  ['I parked next to a car that was the exact same as mine and nearly got in the wrong one.', 'Haha, did the alarm go off?', 'Luckily not.'],
  ['I have been meaning to reply to a message for three weeks.', 'Ha, it is too late now. You have to move country.'],
  ['It is so humid today, my hair has doubled in size.', 'Ha, same.'],
  ['Did you know you can freeze grapes? Life-changing.', 'Wait, really? Trying that.'],
];

// ------------------------------------------------------------------ the conversation being built

interface Line {
  by: Side;
  text: string;
  tag?: string;
}
interface Told {
  lines: Line[];
  done: (ids: Record<string, string>) => void;
}
interface Item {
  owner: Side;
  /** Where in the conversation it is due, 0..1. */
  pos: number;
  /** Told only in a meeting after this one's. */
  after?: Item;
  ready?: (day: number) => boolean;
  /** Meeting it was told in, -1 while untold. */
  meeting: number;
  /** Unrelated turns that share its topic words, placed in random meetings. */
  distract: string[];
  tell: (m: Meet, first: Side) => Told;
}
interface Draft {
  kind: Kind;
  query: string;
  expect: string[];
  expectText?: string[];
  rejectText?: string[];
}
/** Where a fact was told: its lead turn, and every turn needed for its detail. */
interface Ev {
  lead: string;
  ids: string[];
  when?: When;
}
interface Catchup {
  owner: Side;
  after: number;
  q: readonly string[];
  a: readonly string[];
  v: Vals;
  used: boolean;
}
interface Conv {
  r: Rand;
  people: [{ name: string; sex: Sex }, { name: string; sex: Sex }];
  used: Set<string>;
  drafts: Draft[];
  reg: Map<string, Ev>;
  catchups: Catchup[];
  /** Names of a speaker's people the other has heard of, for "say hi to Ana for me". */
  known: [string[], string[]];
  traits: [Map<Trait, string[]>, Map<Trait, string[]>];
  starts: [{ h: Hobby; ev: Ev }[], { h: Hobby; ev: Ev }[]];
  habits: [Map<string, Ev>, Map<string, Ev>];
  dated: [{ gist: string; iso: string; ev: Ev; meeting: number }[], { gist: string; iso: string; ev: Ev; meeting: number }[]];
  /** Pick counter and when each set phrase was last said, for `fresh`. */
  tick: number;
  lastUsed: Map<string, number>;
}

function draw<T>(c: Conv, pool: readonly T[], key: (x: T) => string = String, ok: (x: T) => boolean = () => true): T {
  const free = pool.filter((x) => !c.used.has(key(x)) && ok(x));
  const x = pick(c.r, free.length ? free : pool);
  c.used.add(key(x));
  return x;
}
function drawThird(c: Conv): readonly [string, Sex] {
  return draw(c, THIRDS, (t) => t[0]);
}

function ownerVals(c: Conv, s: Side): Vals {
  const me = c.people[s];
  const p = PRON[me.sex];
  return { P: me.name, Q: c.people[other(s)].name, he: p.he, He: cap(p.he), him: p.him, his: p.his, His: cap(p.his) };
}
/** How many picks back a set phrase counts as just said. */
const RECENT = 60;
const recent = (c: Conv, key: string): boolean => c.tick - (c.lastUsed.get(key) ?? -Infinity) <= RECENT;
/**
 * A pick that avoids phrases said recently anywhere in the conversation (pools overlap), so set phrases
 * do not repeat too soon; when a small pool is used up, it takes one of the least recently said.
 */
function fresh<T>(c: Conv, pool: readonly T[], ok: (x: T) => boolean = () => true, window = RECENT): T {
  const fits = pool.filter(ok);
  const xs = fits.length ? fits : pool;
  const age = (x: T): number => c.tick - (c.lastUsed.get(String(x)) ?? -Infinity);
  const free = xs.filter((x) => age(x) > window);
  const x = free.length ? pick(c.r, free) : pick(c.r, [...xs].sort((a, b) => age(b) - age(a)).slice(0, Math.ceil(xs.length / 3)));
  c.lastUsed.set(String(x), c.tick++);
  return x;
}
function say(c: Conv, by: Side, tpls: readonly string[], v: Vals, ok?: (t: string) => boolean): string {
  return cap(fill(fresh(c, tpls, ok), { ...v, you: c.people[other(by)].name }));
}
function addTrait(c: Conv, s: Side, t: Trait, id: string): void {
  const m = c.traits[s];
  const xs = m.get(t) ?? [];
  if (!xs.includes(id)) xs.push(id);
  m.set(t, xs);
}
function draft(c: Conv, kind: Kind, qs: readonly string[], v: Vals, expect: string[], extra: { expectText?: string[]; rejectText?: string[] } = {}): void {
  c.drafts.push({ kind, query: cap(fill(pick(c.r, qs), v)), expect: [...new Set(expect)], ...extra });
}

// ------------------------------------------------------------------ facts told in passing

interface PSpec {
  kind: Kind;
  q: readonly string[];
  /** Needs the detail (the answer turn, when split over a question). */
  detail?: boolean;
  /** Value key whose text a right answer holds. */
  text?: string;
  /** Value key of the superseded value (update probes). */
  reject?: string;
}
interface FactSpec {
  key: string;
  mood: Mood;
  when?: WhenKind;
  /** Happens in the evening or all day, so it is never told as "this morning". */
  evening?: boolean;
  /** Lead without the detail. */
  core: readonly string[];
  /** Lead with the detail; without it the detail comes only from a follow-up question. */
  full?: readonly string[];
  /** The other person's follow-up question, and the owner's answer holding the detail. */
  ask?: readonly string[];
  answer?: readonly string[];
  /** Chance the detail is drawn out by a question. @default 0.6 */
  split?: number;
  coreHas: readonly string[];
  detailHas?: readonly string[];
  react?: readonly string[];
  /** Extra replies after the answer ("I'm so proud of you" fits a race, not a paint colour). */
  after?: readonly string[];
  /** The other person invites, and the lead is the owner's reply (weekly habits: "can't, I ..."). */
  invite?: { prompt: readonly string[]; core: readonly string[] };
  probes: readonly PSpec[];
  later?: { q: readonly string[]; a: readonly string[] };
  distract?: readonly string[];
  traits?: readonly Trait[];
}
interface FactHooks {
  after?: Item;
  ready?: (day: number) => boolean;
  told?: (ev: Ev, m: Meet) => void;
  /** Registered for ordering probes ("which came first"), with the owner's pronouns filled in. */
  gist?: string;
}

function fact(c: Conv, owner: Side, pos: number, spec: FactSpec, v0: Vals, hooks: FactHooks = {}): Item {
  const r = c.r;
  const ov = ownerVals(c, owner);
  const base = { ...ov, ...v0 };
  const ds = spec.distract ? shuffle(r, [...spec.distract]).slice(0, 1 + (r() < 0.5 ? 1 : 0)) : [];
  const item: Item = {
    owner, pos, after: hooks.after, ready: hooks.ready, meeting: -1,
    distract: ds.map((d) => fill(d, base)),
    tell(m, first) {
      const v = { ...base };
      let w: When | undefined;
      if (spec.when) {
        w = when(r, m, spec.when, spec.evening);
        v.when = w.text;
      }
      const invited = first !== owner && !!spec.invite && r() < 0.75;
      const split = !invited && !!(spec.ask && spec.answer) && r() < (spec.split ?? 0.6);
      const detailGiven = split || !!spec.full;
      const x = other(owner);
      const lines: Line[] = [];
      if (invited) lines.push({ by: x, text: say(c, x, spec.invite!.prompt, v) });
      else if (first !== owner) {
        // "How was your weekend?" only early in the week.
        const early = [1, 2].includes(new Date(m.day).getUTCDay());
        const prompts = spec.mood === 'bad' ? PROMPTS_BAD : spec.mood === 'good' ? PROMPTS_GOOD : PROMPTS;
        lines.push({ by: x, text: say(c, x, prompts, v, (t) => early || !t.includes('weekend')) });
      }
      // A template may carry its own replies after '|', alternating speakers from the other person.
      const [leadTpl, ...replies] = fresh(c, invited ? spec.invite!.core : split || !spec.full ? spec.core : spec.full).split('|');
      const lead = cap(fill(leadTpl!, { ...v, you: c.people[x].name }));
      holds(lead, v, spec.coreHas, 'lead');
      if (!split && spec.full) holds(lead, v, spec.detailHas ?? [], 'lead');
      if (first === owner && spec.mood === 'good' && r() < 0.3) lines.push({ by: owner, text: fresh(c, SEGUES) });
      lines.push({ by: owner, text: lead, tag: 'lead' });
      if (split) {
        const ask = say(c, x, spec.ask!, v);
        const own = /^(ooh|oh|ha|aww|wait|congrat|nooo|amazing|boy|stop)/i.test(ask);
        const react = !own && r() < 0.6 ? `${fresh(c, spec.react && r() < 0.5 ? spec.react : REACT[spec.mood])} ` : '';
        lines.push({ by: x, text: react + ask });
        const answer = say(c, owner, spec.answer!, v);
        holds(answer, v, spec.detailHas ?? [], 'answer');
        lines.push({ by: owner, text: answer, tag: 'detail' });
        if (r() < 0.75) lines.push({ by: x, text: fresh(c, spec.after && r() < 0.5 ? spec.after : AFTER[spec.mood]) });
      } else if (replies.length && (invited || r() < 0.9)) {
        replies.forEach((t, i) => lines.push({ by: i % 2 === 0 ? x : owner, text: cap(fill(t, v)) }));
      } else {
        lines.push({ by: x, text: cap(fill(fresh(c, spec.react && r() < 0.7 ? spec.react : REACT[spec.mood]), v)) });
      }
      return {
        lines,
        done(ids) {
          const leadId = ids.lead!;
          const ev: Ev = { lead: leadId, ids: split ? [leadId, ids.detail!] : [leadId], when: w };
          c.reg.set(`${owner}:${spec.key}`, ev);
          for (const p of spec.probes) {
            if (p.detail && !detailGiven) continue;
            const extra: { expectText?: string[]; rejectText?: string[] } = {};
            if (p.kind === 'temporal') {
              const resolved = w?.iso ?? w?.month;
              if (!resolved) continue;
              extra.expectText = [resolved];
            } else if (p.text) extra.expectText = [v[p.text]!];
            if (p.reject) extra.rejectText = [v[p.reject]!];
            draft(c, p.kind, p.q, v, p.detail ? ev.ids : [leadId], extra);
          }
          for (const t of spec.traits ?? []) for (const id of ev.ids) addTrait(c, owner, t, id);
          if (spec.later) c.catchups.push({ owner, after: m.k, q: spec.later.q, a: spec.later.a, v, used: false });
          if (hooks.gist && w?.iso) c.dated[owner].push({ gist: fill(hooks.gist, v), iso: w.iso, ev, meeting: m.k });
          hooks.told?.(ev, m);
        },
      };
    },
  };
  return item;
}

// ------------------------------------------------------------------ fact kinds

const jobSpec = (changes: boolean): FactSpec => ({
  key: 'job', mood: 'plain',
  core: [
    'Sorry, only just got home. Long day at {company}, {gripe}.|Oof, that sounds like a lot.',
    'Work is chaos this week. At {company} {gripe}, so that was fun.|Urgh, poor you.',
    "I've been at {company} {years} years now, can you believe it? Where does the time go.|Wow, that's ages! They're lucky to have you.",
    "Not much news, just work. {company} is having its summer party on Friday, so that's something.|Ooh, free drinks!",
    'Honestly, {company} would fall apart without the tea urn. Today {gripe}.|Ha, the tea urn is doing the real work.',
  ],
  full: [
    'Long day at {company}. Being {role} is fine until {gripe}.|Oof. Sounds exhausting.',
    'I do love being {role}, but today at {company} {gripe}.|Ha, that sounds about right.',
    "{years} years as {role} at {company} and today was a first: {gripe}.|Haha, never a dull moment.",
  ],
  ask: ['Remind me what you do there again?', 'Wait, what is it you actually do there? I always forget.', "What's your actual job there?"],
  answer: ["I'm {role}! Basically {joke}.", '{role}, officially. In practice {joke}.', '{role}. Which means {joke}, mostly.'],
  coreHas: ['company'], detailHas: ['role'],
  react: ['Oof, sounds like a lot.', 'Ha, classic.', 'Urgh, poor you.'],
  probes: changes
    ? [{ kind: 'single-hop', detail: true, q: ['What was {P} doing for a living at {company}?', "What was {P}'s role at {company}?"], text: 'roleWord' }]
    : [
        { kind: 'single-hop', q: ['Which company does {P} work for?', "What is the name of {P}'s employer?", 'Where does {P} work?'], text: 'word' },
        { kind: 'single-hop', detail: true, q: ['What does {P} do for a living?', "What is {P}'s job?", 'What line of work is {P} in?'], text: 'roleWord' },
      ],
  later: changes ? undefined : { q: ["How's work?", 'Is work still mad?', 'How are things at work?'], a: ['Calmer, thank god.', "Same as ever. Don't ask, haha.", 'Busy, but fine.'] },
  distract: [
    "My neighbour just got a job at some big logistics company, she says the hours are brutal.|Oof. Is she sticking with it?|She says she'll give it a month.",
    'Does anyone actually like their work? Genuine question.|Some people, apparently. I have never met them.',
    "There's a company near me that does four-day weeks. So jealous.|Imagine. I'd get so much sleep.",
    'A guy at the gym works in insurance and talks about it nonstop.|Ha, the gym is the worst place for that.',
    'What would you do for a living if money did not matter?|Honestly? Run a tiny bookshop and never make a penny.',
    "My friend's employer just banned working from home and everyone is furious.|I'd riot, honestly.",
  ],
});

const JOB2: FactSpec = {
  key: 'job2', mood: 'good', when: 'day',
  after: ["I'm so proud of you.", 'You legend.', 'Honestly, well done.'],
  core: [
    'So I did a thing. I took the job at {company}, and my first day was {when}!',
    'First day at {company} was {when}! Everyone seems lovely so far.',
    "Big news: I've officially jumped ship. I started at {company} {when}.",
    '{when} was my first day at {company}. New badge, new desk, new everything.',
  ],
  ask: ['Wait, tell me everything. What will you be doing?', "What's the new role?", 'What are you doing there?'],
  answer: ["I'm {role} now. Basically {joke}.", '{role}! So {joke}, but with better biscuits.'],
  coreHas: ['company', 'when'], detailHas: ['role'],
  react: ['Congrats!!', 'Ahh, the new job!'],
  probes: [
    { kind: 'update', q: ['Where does {P} work now?', 'Which company is {P} working for these days?', "Who is {P}'s current employer?"], text: 'word', reject: 'oldWord' },
    { kind: 'temporal', q: ['When did {P} start the new job?', 'On what date did {P} begin working at {company}?'] },
    { kind: 'single-hop', detail: true, q: ["What is {P}'s role at {company}?", 'What position did {P} take at {company}?'], text: 'roleWord' },
  ],
  later: { q: ["How's the new job going?", 'Still enjoying the new job?'], a: ["Really good, actually. I don't dread Mondays any more.", 'Good! Still learning where the good mugs are kept.'] },
  distract: ["A friend of mine is thinking about changing jobs, but she's scared to jump.|It's a big step. Tell her to go for it.", 'Everyone I know seems to be starting a new job this year.|I know! Must be something in the water.', 'I would never have the nerve to hand my notice in.|You would if you had to, I reckon.'],
};

const townSpec = (moves: boolean): FactSpec => ({
  key: 'town', mood: 'plain',
  core: [
    "It hasn't stopped raining here in {town} all week.|Same here, my garden is a swamp.",
    'They finally opened a proper bakery in {town}. Life-changing.|Ooh, I need to visit.',
    "I love living in {town}, but the roadworks are going to outlast us all.|Ha, they never actually finish, do they?",
    "Everyone in {town} is out in the sun today, it's like a festival.|Love that. Enjoy it!",
    "{town} is so quiet on a Sunday morning, I love it.|Sounds bliss.",
    "There's a man in {town} who walks his cat on a lead. I see him every morning.|Haha, iconic.",
  ],
  coreHas: ['town'],
  react: ['Ha, sounds about right.', 'Oh, I love that.', 'Haha, classic.', 'Sounds lovely, honestly.'],
  probes: moves ? [] : [{ kind: 'single-hop', q: ['Which town does {P} live in?', 'Where is {P} based?', 'What is the name of the town {P} calls home?'], text: 'town' }],
  distract: [
    'My cousin wants to move out of the city to some little town by the sea.|Honestly, same dream.',
    'I could never live in a town where everyone knows your business.|Ha, I think I would secretly love it.',
    'Where would you live if you could live anywhere?|Somewhere with a good bakery and no hills.',
    'My friend lives right by the river and gets flooded every winter.|Oh no, that sounds awful.',
  ],
});

const MOVE: FactSpec = {
  key: 'move', mood: 'good', when: 'day',
  core: [
    "We got the keys to the new flat {when}! It's in {town2}, right by the river.",
    "Sorry I've been quiet, we moved to {town2} {when} and I'm buried in boxes.",
    '{when} I finally said goodbye to the old place. {town2} from now on!',
    'Officially a resident of {town2} as of {when}. Everything I own is in a box.',
  ],
  coreHas: ['town2', 'when'],
  react: ['Congrats on the move!!', "Oh exciting! I didn't realise it was so soon.", 'Ahh, a new place!'],
  probes: [
    { kind: 'update', q: ['Where does {P} live now?', 'Which town is {P} living in these days?', 'In which town has {P} settled now?'], text: 'town2', reject: 'town1' },
    { kind: 'temporal', q: ['When did {P} move house?', 'On what date did {P} relocate to {town2}?'] },
  ],
  later: { q: ["How's the new place?", 'Settled in yet?'], a: ['Getting there! Still one box of mystery cables.', 'Mostly! I keep walking to the old bus stop by accident.'] },
  distract: ["Our neighbours are moving out, the van has been outside all day.|Ooh, any idea who's moving in?|Not yet. I'm choosing to be nosy about it.", "I never want to move house again, it's so stressful.|The packing alone! Never again.", "Do you know anyone who needs a sofa? My friend is moving and can't take hers.|I'll ask around!"],
};

const HOME: FactSpec = {
  key: 'home', mood: 'plain',
  core: [
    'This weather reminds me of growing up in {home}, we got snowed in every single winter.|Ha, that sounds kind of magical.',
    'When I was a kid in {home} we had exactly one bus a day.|One! What happened if you missed it?|You walked. Uphill.',
    "Going back to {home} always makes me feel about twelve again. It's where I grew up.|Aw, I get that.",
    'I went to school in {home}, and honestly nobody there ever leaves.|Ha, every town has that.',
    "You'd love {home}. It's where I grew up, all hills and sheep.|Sounds idyllic.",
  ],
  coreHas: ['home'],
  react: ['Ha, I love that.', 'Aw.', 'Sounds idyllic, honestly.'],
  probes: [{ kind: 'single-hop', q: ['Where did {P} grow up?', 'Which town is {P} originally from?', 'In which town did {P} spend {his} childhood?'], text: 'home' }],
  distract: ['My friend grew up on a farm, she has the best stories about it.|Ha, I bet. Lambs in the kitchen?|Exactly that.', "Childhood summers felt so long, didn't they?|Endless. Now a summer lasts about a week.", 'Is it weird that I still dream about my old school?|Not at all, everyone does.', 'My colleague grew up in a town so small it only had one shop.|Ha, I love that.'],
};

const petSpec = (dog: boolean): FactSpec => ({
  key: 'pet', mood: 'plain', traits: dog ? ['dog'] : [],
  core: [
    'Sorry, I was distracted, {pet} {mess}. Typical {kind}.',
    "My {kind} {pet} {mess} this morning, so that's how my day started.",
    '{pet} {mess}. I love that {kind}, but honestly.',
    "Can't talk long, {pet} {mess} and I need to deal with it. The joys of having a {kind}.",
  ],
  full: ['My {kind} {pet} {mess}. {petHe} is a {breed}, which explains a lot.', 'Sorry, my {kind} {pet} {mess}. {petHe} is a {breed} and a menace.'],
  ask: ['Haha, what does {pet} look like again?', 'Remind me what kind of {kind} {pet} is?'],
  answer: ['{petHe} is a {breed}. Gorgeous, zero brain cells.', 'A {breed}! Very pretty, very naughty.'],
  coreHas: ['pet', 'kind'], detailHas: ['breed'],
  react: ['Hahaha.', 'Oh no, haha.', 'Classic.'],
  probes: [
    { kind: 'single-hop', q: ["What is the name of {P}'s {kind}?", "What is {P}'s {kind} called?"], text: 'pet' },
    { kind: 'single-hop', detail: true, q: ['What sort of {kind} does {P} have?', "How would {P} describe {his} {kind}'s looks?"], text: 'breed' },
  ],
  later: { q: ['Is your {kind} behaving?', 'Has the {kind} been behaving?'], a: ['Absolutely not, haha.', 'For now!', 'Currently asleep, so yes.'] },
  distract: [
    'A {kind} at the park today tried to steal my sandwich.|Haha, did it succeed?|Half of it.',
    "My neighbour's {kind} has a better name than most people I know.|Ha, what's it called?|Sir Reginald. I'm not joking.",
    'Someone at work brings their {kind} in on Fridays, best day of the week.|Honestly, every office needs one.',
    'My colleague is thinking of getting a {kind}, she keeps sending me photos of ones up for adoption.|Ha, she has clearly already decided.',
  ],
});

const ADOPT: FactSpec = {
  key: 'adopt', mood: 'good', when: 'day', split: 0.8,
  core: [
    'We adopted a {young} {when}!',
    "So... there's a {young} asleep on my feet right now. We picked {pethim} up from the rescue {when}.",
    "{when} we brought home a little rescue {young}. I'm obsessed.",
    'I have news. We got a {young} {when}!',
  ],
  full: ['We adopted a {young} {when}! A {breed} called {pet}.', '{when} we brought home a rescue {young}, a {breed}. {petHe} is called {pet}.'],
  ask: ["What's {pethis} name?!", 'Noooo, I need details. Name? Breed?', "What's {pethe} called?"],
  answer: ['{pet}! {petHe} is a {breed} and total chaos.', '{pet}. A {breed}, and already in charge of the house.'],
  coreHas: ['young', 'when'], detailHas: ['pet', 'breed'],
  react: ['STOP. Photos, please!', 'Oh my god, yes!!', "Ahh, that's the best news."],
  probes: [
    { kind: 'single-hop', detail: true, q: ['What did {P} name the new {kind}?', 'What is the name of the {kind} {P} adopted?'], text: 'pet' },
    { kind: 'single-hop', detail: true, q: ['What type of {kind} did {P} take in?', 'What kind of {kind} is the one {P} just got?'], text: 'breed' },
    { kind: 'temporal', q: ['When did {P} get {his} new {kind}?', 'When did {P} bring the rescue {kind} home?'] },
  ],
  later: { q: ["How's the {young} settling in?", "How's life with the new {young}?"], a: ["Slowly! We're all very tired.", 'Getting there. The sofa has not survived.', "Chaotic, but we're smitten."] },
  distract: ["The rescue centre near work has a board of {kind}s up for adoption in the window. I have to cross the road.|Ha, very wise.", 'There were so many {young}s at the park today, I nearly cried.|Best kind of day.', "Naming a pet is so hard, my friend changed her {kind}'s name three times.|Ha, poor confused animal."],
};

const sibSpec = (rel: string): FactSpec => ({
  key: `sib:${rel}`, mood: 'plain',
  core: [
    'My {rel} {sib} is staying with me this week, so the flat is chaos.',
    'I had dinner with my {rel} {sib} last night, we laughed until we cried.',
    '{sib}, my {rel}, just rang me to moan about {sibhis} week. Very entertaining.',
    "My {rel} {sib} is coming over later, so I've been tidying like a maniac.",
  ],
  full: [
    'My {rel} {sib} is {job} and {sibhe} {hint}, so I never complain about my week around {sibhim}.',
    "I had dinner with my {rel} {sib} last night. {sibHe}'s {job} now, and {sibhe} {hint}.",
  ],
  ask: ['What does {sib} do again?', 'Remind me what {sib} does for work?'],
  answer: ["{sibHe}'s {job}. {sibHe} {hint}, I don't know how.", '{job}! {sibHe} {hint}. Way more grown-up than me.'],
  coreHas: ['sib', 'rel'], detailHas: ['job'],
  react: ["Aw, that's nice.", 'Ha, sounds fun.', 'Oh I love that.'],
  probes: [{ kind: 'single-hop', detail: true, q: ["What does {P}'s {rel} do for work?", "What line of work is {P}'s {rel} in?", "What is the profession of {P}'s {rel} {sib}?"], text: 'jobWord' }],
  later: { q: ['How is {sib} getting on?', 'Is {sib} doing okay?'], a: ['Good! Busy as ever.', "Yeah, all good. I'll tell {sibhim} you asked."] },
  distract: ["My colleague's {rel} just quit {sibhis} job to go travelling. Brave.|So brave. I'd be terrified.", 'I think every family has one {rel} who does all the organising.|Ha, and everyone else just turns up.', "Do you think people end up in the same line of work as their family? Half my friends did.|Probably, it's what you grow up around."],
});

const babySpec = (girl: boolean): FactSpec => ({
  key: 'baby', mood: 'good', when: 'day', split: 0.85,
  core: ["My {rel} {sib} became a parent {when}! I'm an {aunt} now!", "{when} I became an {aunt}! {sib}'s baby arrived and everyone is fine."],
  full: ['My {rel} {sib} had a baby {when}! A little {babyKind} called {baby}.'],
  ask: ['Boy or girl?! Name?', "Congratulations!! What's the baby called?"],
  answer: girl ? ["A little girl called {baby}. She's perfect.", 'A girl! {baby}. Tiny and furious.'] : ["A little boy called {baby}. He's perfect.", 'A boy! {baby}. Tiny and furious.'],
  coreHas: ['sib', 'when'], detailHas: ['baby'],
  probes: [
    { kind: 'single-hop', detail: true, q: ["What is the name of {P}'s new {nibling}?", "What did {P}'s {rel} call the baby?"], text: 'baby' },
    { kind: 'temporal', q: ["When was {P}'s {rel}'s baby born?", 'On what date did {P} become an {aunt}?'] },
  ],
  later: { q: ["How's the baby?", "How's the new {nibling}?"], a: ['Gorgeous. I could stare at that little face all day.', "So tiny! I'm completely smitten."] },
  distract: ['There are so many babies at the café in the mornings now.|It must be the good pastries.', "My neighbour's baby screams at exactly three every morning.|Oh no. Like an alarm clock.", "Baby clothes are so tiny, I can't cope.|The little socks!"],
});

const PARTNER: FactSpec = {
  key: 'partner', mood: 'plain',
  core: [
    'Me and my {rel} {partner} spent the whole weekend repainting the hallway.',
    "{partner} (my {rel}, I don't think you've met) has decided we're repainting the hallway. I've been up a ladder all day.",
    'My {rel} {partner} and I finally repainted the hall. My arms are dead.',
  ],
  full: ['Me and my {rel} {partner} spent the whole weekend painting the hallway {colour}.', 'My {rel} {partner} and I finally painted the hall {colour}. My arms are dead.'],
  ask: ['Ooh, what colour did you go for?', 'What colour is it now?'],
  answer: ['{colour}! {partner} picked it. I was sceptical, but it works.', "{colour}. It's very bold. I love it."],
  coreHas: ['partner', 'rel'], detailHas: ['colour'],
  react: ['Ooh, fancy.', 'Ha, rather you than me.', 'Love a project.'],
  probes: [
    { kind: 'single-hop', q: ["What is the name of {P}'s {rel}?", "Who is {P}'s {rel}?"], text: 'partner' },
    { kind: 'single-hop', detail: true, q: ["What colour is {P}'s hallway now?", 'Which shade did {P} and {his} {rel} choose for the hall?'], text: 'colourWord' },
  ],
  later: { q: ['Is the hallway finished?', 'How did the painting end up?'], a: ['Finally! Never again.', "Done, apart from one patch I'm ignoring."] },
  distract: ['Painting is the worst job, I always get it in my hair.|Ha, same. And somehow on the ceiling.', 'My neighbours painted their front door bright orange. Very brave.|I kind of love that.', "Is it normal to have opinions about paint colours now? I think I'm old.|We're both old. It's fine."],
};

const PARENT: FactSpec = {
  key: 'parent', mood: 'plain',
  core: ['My {par} has just retired and is already bored out of {parhis} mind.', 'My {par} retired, and now rings me every single day with updates.'],
  full: ['My {par} retired and has taken up {pastime}, of all things.', 'Did I tell you my {par} has taken up {pastime} since retiring? {parHe} is obsessed.'],
  ask: ["Ha! What's {parhe} doing with all that free time?", 'What is {parhe} filling the days with?'],
  answer: ['{pastime}! {parHe} sends me updates daily.', '{pastime}, if you can believe it.'],
  coreHas: ['par'], detailHas: ['pastime'],
  probes: [{ kind: 'single-hop', detail: true, q: ["What has {P}'s {par} taken up in retirement?", "How is {P}'s {par} keeping busy after stopping work?"], text: 'pastimeWord' }],
  distract: ['My aunt retired and immediately got busier than ever.|That always happens!', 'Retirement sounds amazing. I would just read all day.|You would last a week.', 'My old boss retired and now sends everyone photos of his vegetables.|Honestly, good for him.'],
};

const KID: FactSpec = {
  key: 'kid', mood: 'plain', when: 'next',
  core: [
    "My {rel} {kid} starts school {when} and I'm already emotional about it.",
    'We went shopping for tiny school shoes. My {rel} {kid} starts {when}!',
    'Big milestone coming up: {kid}, my {rel}, starts school {when}.',
  ],
  ask: ['Aww! Is {kidhe} excited?', 'Is {kidhe} ready for it?'],
  answer: ['{kidHe} keeps asking if there will be {x} there.', 'Very. {kidHe} has asked about {x} every day this week.'],
  coreHas: ['kid', 'rel', 'when'], detailHas: ['x'],
  probes: [
    { kind: 'single-hop', q: ["What is the name of {P}'s {rel}?", "What is {P}'s {rel} called?"], text: 'kid' },
    { kind: 'temporal', q: ["In which month does {P}'s {rel} start school?", "When is {P}'s {rel} due to begin at school?"] },
    { kind: 'open', q: ['Is {P} likely to be doing school runs soon?', 'Does {P} probably have young children at home?'] },
  ],
  later: { q: ["How's school going for your little one?", 'Has the school routine settled down?'], a: ['Better than me! I cried at the gate.', 'Mostly. Mornings are still carnage.'] },
  distract: ['The school near me has a new playground, the noise at lunchtime is unreal.|Ha, the joyful screaming.', "My neighbour's son just started school, and she cried more than he did.|Aww. That's so sweet.", 'School shoes are weirdly expensive for something that gets destroyed in a week.|Daylight robbery.'],
};

const DRINK: FactSpec = {
  key: 'drink', mood: 'plain',
  core: [
    "Give me ten minutes, I haven't had my {drink} yet and I'm useless without it.|Ha, take your time.",
    'First thing I do every morning is make a {drink}. Non-negotiable.|A ritual. I respect it.',
    "I'm on my second {drink} of the day already.|Ha, steady on.",
    "Sorry if I'm slow, I can't think until I've had my morning {drink}.|Ha, no rush.",
  ],
  coreHas: ['drink'],
  react: ['Ha, same energy.', 'Honestly, fair.', 'A ritual. I respect it.'],
  probes: [{ kind: 'single-hop', q: ['What does {P} need to drink first thing in the morning?', "What is {P}'s usual morning drink?", 'What does {P} have to start the day?'], text: 'drinkWord' }],
  distract: ['That new café by the station does nineteen kinds of drink and I want none of them.|Ha, just give me something normal.', 'Someone at work drinks six cups of something a day and is still tired.|That is not a good sign.', 'I read that morning people are born, not made.|Ha, that explains a lot.'],
};
const DRINK2: FactSpec = {
  key: 'drink2', mood: 'plain',
  core: [
    "New morning routine: it's a {drink} now, I've gone right off the old stuff.",
    "I've switched, by the way. Mornings are a {drink} now, and I feel weirdly smug about it.",
    "Guess who starts the day with a {drink} now? Me. I'm a changed person.",
  ],
  coreHas: ['drink'],
  react: ['Who even are you?', 'Ha, very healthy.', 'A new era.'],
  probes: [{ kind: 'update', q: ['What does {P} drink in the mornings these days?', "What is {P}'s morning drink now?"], text: 'drinkWord', reject: 'oldWord' }],
};

const DISLIKE: FactSpec = {
  key: 'dislike', mood: 'plain',
  core: [
    "Ugh, the canteen put {food} in everything today. I can't stand {food}.|Ha, the canteen betrayed you.",
    'They put {food} on everything at that place, so I spent the whole meal picking it off. Hate the stuff.|Ha, you should have asked them to leave it off.',
    "I'd eat anything except {food}. It's just wrong.|Controversial! I quite like it.",
  ],
  coreHas: ['food'],
  react: ['Ha, fair enough.', 'Controversial!', "I won't tell anyone."],
  probes: [{ kind: 'single-hop', q: ['Which food can {P} not stand?', 'What ingredient does {P} refuse to eat?', 'What would {P} pick off a plate?'], text: 'food' }],
  distract: ['My uncle will eat literally any food, it is actually impressive.|A human bin. Respect.', 'Is there any food you could eat every day and never get bored of?|Toast. Easily.', "I read that some people's taste buds are just different, which explains a lot of arguments.|Ha, that explains my whole family."],
};
const CUISINE: FactSpec = {
  key: 'cuisine', mood: 'plain',
  core: [
    "I've been craving {cuisine} all week. I could eat it every single day.|Ooh, now I want some too.",
    "If I could only eat one thing for the rest of my life it'd be {cuisine}.|Solid choice.",
    'We had {cuisine} again last night. Third time this week, no shame.|No shame at all.',
  ],
  coreHas: ['cuisine'],
  probes: [{ kind: 'single-hop', q: ["What is {P}'s favourite kind of food?", 'What meal would {P} happily have every night?'], text: 'cuisineWord' }],
};
const SEASON: FactSpec = {
  key: 'season', mood: 'plain',
  core: ["Honestly, {season} is the best time of year and I won't be taking questions.|Ha, fair enough.", 'I love {season} so much. Everything just feels better.|I can see that.', "{season} is my favourite, I don't care what anyone says.|Ha, noted."],
  coreHas: ['season'],
  probes: [{ kind: 'single-hop', q: ['Which time of year does {P} like most?', "What is {P}'s favourite season?"], text: 'season' }],
};
const allergySpec = (cats: boolean): FactSpec => ({
  key: 'allergy', mood: 'bad',
  core: [
    "I'm allergic to {allergen}, so visiting my friend's place is always a sneezy affair.",
    "I found out properly this week that I'm allergic to {allergen}. Explains a lot.",
    "My eyes are streaming, sorry. I'm allergic to {allergen} and I forgot my tablets.",
  ],
  coreHas: ['allergen'],
  react: ['Oh no, that is so annoying.', 'Poor you.'],
  probes: [
    { kind: 'single-hop', q: ['What is {P} allergic to?', 'What gives {P} an allergic reaction?'], text: 'allergen' },
    ...(cats ? [{ kind: 'open' as const, q: ['Would {P} be comfortable house-sitting for a friend with three cats?', 'Should a friend bring a kitten along when visiting {P}?'] }] : []),
  ],
  distract: ['Hay fever season is brutal this year, everyone at work is sniffing.|Same here, it is like a hospital ward.', 'My colleague is allergic to almost everything, she carries a whole pharmacy in her bag.|Poor thing.'],
});
const OWL: FactSpec = {
  key: 'sleep', mood: 'plain',
  core: ["I'm such a night owl. Never asleep before one, never functional before ten.|Ha, I couldn't do that.", "I've accepted I'll never be a morning person. My brain wakes up at about eleven at night.|Ha, the wrong time entirely."],
  coreHas: [],
  probes: [{ kind: 'open', q: ['Would {P} enjoy a sunrise walk at six in the morning?', 'Is {P} likely to be full of energy at seven in the morning?'] }],
};
const LARK: FactSpec = {
  key: 'sleep', mood: 'plain',
  core: ["I'm up at half five every day, even weekends. My body just does it.|That's horrifying. Impressive, but horrifying.", "My alarm is set for five every day and I never need it. I'm always up before it.|How?! I can barely get up at eight."],
  coreHas: [],
  probes: [{ kind: 'open', q: ['Would {P} mind a very early start for a day trip?', 'Is {P} more of a morning person or a night owl?'] }],
};
const VEG: FactSpec = {
  key: 'veg', mood: 'plain',
  core: ["I haven't eaten meat in {n} years, and honestly I don't miss it.|Fair. The veggie options are so good now anyway.", "Being veggie for {n} years means I'm an expert at finding the one meat-free thing on any menu.|Ha, a special skill."],
  coreHas: ['n'],
  probes: [
    { kind: 'single-hop', q: ['How long has {P} been vegetarian?', 'For how many years has {P} avoided meat?'], text: 'n' },
    { kind: 'open', q: ['Would {P} enjoy a hog roast?', 'Would a steakhouse be a good choice for dinner with {P}?'] },
  ],
};

const VAN: FactSpec = {
  key: 'van', mood: 'good', when: 'day',
  core: ['We bought a tatty old campervan {when}!', '{when} I did something silly and bought a campervan. It smells faintly of soup.'],
  full: ["We bought a tatty old campervan {when}! It's called {vname}."],
  ask: ['Does it have a name?', 'Please tell me it has a name.'],
  answer: ["Obviously. It's called {vname}.", '{vname}. It suits it.'],
  coreHas: ['when'], detailHas: ['vname'],
  probes: [
    { kind: 'single-hop', detail: true, q: ["What is {P}'s van called?", 'What name did {P} give the camper?'], text: 'vname' },
    { kind: 'temporal', q: ['When did {P} buy the campervan?', 'On what date did {P} get {his} van?'] },
  ],
  distract: ['A campervan parked outside mine for a week, I think someone was living in it.|Ha, living the dream.', 'Vans are so expensive now, my cousin paid a fortune for a tiny one.|Wild.'],
};
const TELESCOPE: FactSpec = {
  key: 'telescope', mood: 'good', when: 'day',
  core: ['I bought a second-hand telescope {when}.', '{when} I picked up an old telescope from a neighbour who was moving.'],
  ask: ['Ooh, seen anything yet?', 'Have you spotted anything?'],
  answer: ['{sight}! I actually shouted.', 'Yes! {^sight}. I nearly cried.'],
  coreHas: ['when'], detailHas: ['sight'], split: 0.85,
  probes: [
    { kind: 'single-hop', detail: true, q: ['What did {P} see through the new telescope?', 'What did {P} spot in the night sky?'], text: 'sightWord' },
    { kind: 'temporal', q: ['When did {P} get the telescope?'] },
  ],
  distract: ['My nephew wants to be an astronaut now, he will not stop talking about planets.|Ha, I love that.', "Apparently there's a meteor shower soon, but it's always cloudy when they happen.|Every single time."],
};
const SEWING: FactSpec = {
  key: 'sewing', mood: 'plain', split: 0.9,
  core: ["I've inherited my gran's old sewing machine. It weighs about as much as a car.", "My gran's sewing machine is now living on my kitchen table. It's ancient and I love it."],
  ask: ['What are you going to make?', 'Ooh, what will you make first?'],
  answer: ["{make} first, if I don't sew my finger to it.", "I'm starting with {make}. Wish me luck."],
  coreHas: [], detailHas: ['make'],
  probes: [{ kind: 'single-hop', detail: true, q: ["What is {P} planning to make with {his} gran's sewing machine?", 'What will be the first project on the old machine {P} inherited?'], text: 'make' }],
  traits: ['creative'],
};
const CARGO: FactSpec = {
  key: 'cargo', mood: 'good', when: 'day',
  core: ['We bought a cargo bike {when}, the big shop is so much easier now.', '{when} I finally got a cargo bike. I feel like a delivery van.'],
  ask: ['What colour?', 'Ooh, what colour did you get?'],
  answer: ['{bcolour}, so the cars can actually see me.', '{bcolour}, and enormous.'],
  coreHas: ['when'], detailHas: ['bcolour'], split: 0.85,
  probes: [
    { kind: 'single-hop', detail: true, q: ["What colour is {P}'s new cargo bike?", 'What colour did {P} pick for the new bike?'], text: 'bcolour' },
    { kind: 'temporal', q: ['When did {P} buy a cargo bike?'] },
  ],
  distract: ['Someone cycled past me with a dog in a basket today. Iconic.|Living the dream.', 'The bike lanes round here just stop randomly, it is terrifying.|Same here. They just vanish.'],
};
const RECORDS: FactSpec = {
  key: 'records', mood: 'good', when: 'day',
  core: ['I found an old record player at a car boot sale {when}.', '{when} I rescued a record player from a car boot sale. Five pounds!'],
  ask: ['What was the first thing you played?', 'Ooh, what did you put on first?'],
  answer: ["An old {genre} record of my dad's. It crackles, which I love.", 'A {genre} album from the charity shop. It sounds amazing.'],
  coreHas: ['when'], detailHas: ['genre'], split: 0.85,
  probes: [
    { kind: 'single-hop', detail: true, q: ['What kind of music did {P} first play on the record player?'], text: 'genre' },
    { kind: 'temporal', q: ['When did {P} find the record player?'] },
  ],
  traits: ['music'],
};

const friendTrip: FactSpec = {
  key: 'friend-trip', mood: 'plain',
  core: ["My friend {f} just got back from {fplace}, and {fhe} won't stop talking about it.", "{f}, a friend from work, has just come back from {fplace}. I'm so jealous."],
  ask: ['Ooh, what was the best bit?', 'Did {fhe} have a good time?'],
  answer: ['Apparently {fbest}. {fHe} sent me about a hundred photos.', 'Ha, {fhe} keeps saying {fbest}.'],
  coreHas: ['f', 'fplace'], detailHas: ['fbest'],
  probes: [
    { kind: 'single-hop', q: ["Where did {P}'s friend {f} travel to?", "Which place has {P}'s friend {f} just visited?"], text: 'fplace' },
    { kind: 'single-hop', detail: true, q: ["What did {P}'s friend {f} enjoy most about the trip?"], text: 'fbestWord' },
  ],
};
const friendShop: FactSpec = {
  key: 'friend-shop', mood: 'good',
  core: ['My friend {f} is opening a little {shop} in {ftown}!', "{f}, my oldest friend, has quit {fhis} job to open a {shop}. In {ftown}, of all places."],
  coreHas: ['f', 'shop'],
  react: ['Oh amazing, good for {fhim}!', "That's so brave."],
  probes: [{ kind: 'single-hop', q: ["What kind of business is {P}'s friend {f} opening?", "What is {P}'s friend {f} starting up?"], text: 'shop' }],
  later: { q: ["Did {f}'s place open in the end?"], a: ['Yes! I went on opening day, it was packed.', 'Not yet, the builders are dragging their feet.'] },
};
const friendEngaged: FactSpec = {
  key: 'friend-engaged', mood: 'good', split: 0.85,
  core: ['My oldest friend {f} just got engaged!', '{f}, my friend from uni, got engaged at the weekend!'],
  ask: ['Ahh! How did it happen?', 'Amazing! Where did they get engaged?'],
  answer: ['{proposal}. Very romantic, very {f}.', '{proposal}, apparently. I cried when {fhe} told me.'],
  coreHas: ['f'], detailHas: ['proposal'],
  probes: [{ kind: 'single-hop', detail: true, q: ["Where did {P}'s friend {f} get engaged?", "Where was {P}'s friend {f} when the proposal happened?"], text: 'proposalWord' }],
};

// Dated events, each a person has at most once.
const RACE: FactSpec = {
  key: 'race', mood: 'good', when: 'day',
  after: ["I'm so proud of you.", 'You legend.', 'Honestly, well done.'],
  core: ['I finally ran my first 10k {when}!', "{when} I did my first ever 10k. I'm still a bit in shock.", 'Guess who ran a whole 10k {when}? Me!!'],
  full: ['I finally ran my first 10k {when}, and I finished in {time}!', '{when} I did my first ever 10k and got round in {time}.'],
  ask: ['How did it go?', 'What was your time?', 'How long did it take you?'],
  answer: ["{time}! Slower than I wanted, but I didn't stop once.", '{time}, and I only walked up one hill.', '{time}, and my legs are still not speaking to me.'],
  coreHas: ['when'], detailHas: ['time'],
  probes: [
    { kind: 'temporal', q: ['When did {P} run {his} first 10k?', 'On what date did {P} complete {his} first ten-kilometre race?'] },
    { kind: 'single-hop', detail: true, q: ['How long did {P} take to finish {his} first 10k?', "What was {P}'s finishing time in the race?"], text: 'time' },
  ],
  later: { q: ['Have you been running since the big race?', 'Are you still running?'], a: ['A bit! Nothing that long though.', 'Twice a week, when the weather lets me.'] },
  distract: ['My neighbour is training for a half marathon, I hear him wheezing past every morning.|Ha, poor man.', "There's a race through the park on Sunday so all the roads are closed.|Ugh, that always catches me out.", "I don't understand people who finish a race and say it was fun.|They're lying. Definitely lying."],
  traits: ['active'],
};
const CONCERT: FactSpec = {
  key: 'concert', mood: 'good', when: 'day', evening: true,
  core: ['I went to see {band} {when}!', '{when} I finally saw {band} live.', 'My ears are still ringing, I went to see {band} {when}.'],
  full: ['I went to see {band} {when} with my friend {cf}, they were incredible!'],
  ask: ['Ooh, who did you go with?', 'Did you go on your own?'],
  answer: ["My friend {cf} came with me. {cfHe}'d never heard of them before and now {cfhe}'s obsessed.", 'I dragged {cf} along. {cfHe} cried during the last song, haha.'],
  coreHas: ['band', 'when'], detailHas: ['cf'],
  probes: [
    { kind: 'single-hop', q: ['Which band did {P} see live?', 'What group did {P} go to watch perform?'], text: 'band' },
    { kind: 'temporal', q: ['When did {P} go to the {band} gig?', 'When was {P} at the {band} concert?'] },
    { kind: 'single-hop', detail: true, q: ['Who went with {P} to see {band}?', 'Which friend joined {P} at the gig?'], text: 'cf' },
  ],
  distract: ["Have you heard the new {band2} album? It's everywhere.|Not yet! Is it good?|It's grown on me.", "Tickets for gigs are so expensive now, it's criminal.|Don't. I looked at some last week and nearly cried.", 'My neighbour plays the same band on repeat every night through the wall.|Ha, at least you know all the words now.'],
  traits: ['music'],
};
const WEDDING: FactSpec = {
  key: 'wedding', mood: 'good', when: 'month',
  core: ["{when} was my cousin {cz}'s wedding.", "I'm still recovering from my cousin {cz}'s wedding {when}.", "We were at my cousin {cz}'s wedding {when}, I danced until my feet bled."],
  full: ["{when} was my cousin {cz}'s wedding, up in {wtown}.", "We were at my cousin {cz}'s wedding in {wtown} {when}."],
  ask: ['Where was it?', 'Was it somewhere nice?'],
  answer: ['In {wtown}, in this gorgeous old barn.', '{wtown}! Right by the sea, it was stunning.'],
  coreHas: ['cz', 'when'], detailHas: ['wtown'],
  probes: [
    { kind: 'single-hop', q: ['Whose wedding did {P} go to?', 'Which relative of {P} got married?'], text: 'cz' },
    { kind: 'temporal', q: ["When did {P} go to {his} cousin's wedding?", "In which month was {P}'s cousin's wedding?"] },
    { kind: 'single-hop', detail: true, q: ["Where was {P}'s cousin's wedding held?", "In which town did {P}'s cousin get married?"], text: 'wtown' },
  ],
  distract: ["Weddings are so expensive now, my friend's cost more than a house deposit.|That's mad.", "A friend of mine has three weddings this year and keeps borrowing the same dress.|Ha, very sensible.", 'My cousin is obsessed with true crime podcasts, it is a bit worrying.|Ha, should you be worried?'],
};
const DRIVING: FactSpec = {
  key: 'driving', mood: 'good', when: 'day', split: 0.7,
  after: ["I'm so proud of you.", 'You legend.', 'Honestly, well done.'],
  core: ['I passed my driving test {when}!!', "{when} I passed my driving test. I'm a real adult now."],
  ask: ['First try?', 'Was it your first go?'],
  answer: ["It was my {attempt} attempt, but who's counting.", '{attempt} attempt! I nearly cried in the car park.'],
  coreHas: ['when'], detailHas: ['attempt'],
  probes: [
    { kind: 'temporal', q: ['When did {P} pass {his} driving test?', 'On what date did {P} get {his} licence?'] },
    { kind: 'single-hop', detail: true, q: ['How many tries did it take {P} to pass the test?', 'On which go did {P} finally pass?'], text: 'attempt' },
  ],
  distract: ['The roads round here are full of learner drivers at the moment.|Bless them. We were all there once.', 'My uncle still drives like he is in a rally, it is terrifying.|Ha, I would not get in that car.', 'My neighbour failed her test for going too slowly, can you believe it?|Harsh!'],
};
const QUIZ: FactSpec = {
  key: 'quiz', mood: 'good', when: 'day', evening: true,
  core: ['Our team won the pub quiz {when}!', 'We actually won the quiz at the pub {when}, first time ever.'],
  full: ['Our team, {team}, won the pub quiz {when}!'],
  ask: ["What's your team called?", 'Wait, you have a team name?'],
  answer: ["We're {team}. Don't judge us.", '{team}. It was my idea, sadly.'],
  coreHas: ['when'], detailHas: ['team'],
  probes: [
    { kind: 'single-hop', detail: true, q: ["What is {P}'s quiz team called?", "Under what name does {P}'s trivia team compete?"], text: 'team' },
    { kind: 'temporal', q: ["When did {P}'s team win the quiz?"] },
  ],
  distract: ["Quizzes stress me out, I panic and forget my own name.|Ha, my mind just goes blank too.", 'The pub near me does a music quiz on Thursdays, it is chaos.|Sounds fun, though.', "What's a good team name? My work wants to do a quiz.|Something with a terrible pun, always."],
};
const DINNER: FactSpec = {
  key: 'dinner', mood: 'good', when: 'day', evening: true,
  core: ['I hosted my first proper dinner party {when}.', '{when} I had six people over for dinner, like a real grown-up.'],
  full: ['I hosted my first proper dinner party {when}. I made {dish} and nobody got food poisoning!'],
  ask: ['What did you cook?', 'What was on the menu?'],
  answer: ['{dish}, and nobody got food poisoning!', '{dish}. It took me all afternoon but it was worth it.'],
  coreHas: ['when'], detailHas: ['dish'],
  probes: [
    { kind: 'single-hop', detail: true, q: ['What did {P} serve at {his} dinner party?', 'What did {P} cook for the guests?'], text: 'dishWord' },
    { kind: 'temporal', q: ['When did {P} host {his} dinner party?'] },
  ],
  distract: ["My flatmate from uni once burnt pasta. Burnt it.|How do you even burn pasta?!|Talent.", 'My neighbours had a dinner party last night, it was so loud.|Ha, were you invited?|Sadly not.', 'Cooking for other people is so much pressure!|Only for people who love you unconditionally.'],
  traits: ['food'],
};
const TRIP: FactSpec = {
  key: 'trip', mood: 'good', when: 'month',
  core: ['We went to {place} {when}, first proper holiday in ages.', '{when} we spent a week in {place}. I want to go back already.', 'I still have sand in my bag from {place}. We went {when}.'],
  ask: ['What did you get up to?', 'What was the best bit?'],
  answer: ['Mostly {activity}. Bliss.', '{activity}, every single day.'],
  coreHas: ['place', 'when'], detailHas: ['activity'],
  probes: [
    { kind: 'single-hop', q: ['Where did {P} go on holiday?', "Where was {P}'s last proper holiday?"], text: 'place' },
    { kind: 'temporal', q: ['When did {P} go to {place}?', 'In which month was {P} away in {place}?'] },
    { kind: 'single-hop', detail: true, q: ['What did {P} spend most of the time doing in {place}?'], text: 'activityWord' },
  ],
  distract: ['Everyone at work is off on holiday except me.|Ugh, the empty office is the worst.', 'My friend just went on holiday and sent me forty photos of her breakfast.|Ha, the best kind of holiday update.', 'Where would you go if you could go anywhere for a week?|Somewhere warm with no phone signal.'],
};
const INJURY: FactSpec = {
  key: 'injury', mood: 'bad', when: 'day',
  core: ['I sprained my {part} {when}, {cause}.', '{when} I managed to sprain my {part}. {^cause}, if you can believe it.'],
  ask: ['Oh no! How long will it take to heal?', 'Ouch! Did the doctor say how long?'],
  answer: ["{weeks} weeks of rest, apparently. I'm already going mad.", 'About {weeks} weeks. Everything takes twice as long.'],
  coreHas: ['part', 'when'], detailHas: ['weeks'],
  probes: [
    { kind: 'single-hop', q: ['What did {P} injure?', 'Which part of {his} body did {P} hurt?'], text: 'part' },
    { kind: 'temporal', q: ['When did {P} sprain {his} {part}?', 'On what date did {P} get hurt?'] },
    { kind: 'single-hop', detail: true, q: ['How long did the doctor tell {P} to rest?', 'How many weeks was {P} told to take it easy?'], text: 'weeks' },
  ],
  later: { q: ["How's the {part}?", 'Is the {part} healing okay?'], a: ['Much better, thanks! Nearly back to normal.', 'Getting there, slowly.'] },
  distract: ['My colleague broke her wrist skiing, she is typing with one hand.|Ouch, poor her.', 'The pavements round here are lethal when it rains.|Same here. Total ice rink.', 'A friend who is a physio says everyone sprains something eventually.|Cheery.'],
};
const BIRTHDAY: FactSpec = {
  key: 'birthday', mood: 'good', when: 'day', evening: true,
  core: ['It was my birthday {when}, and {giver} surprised me with {gift}.', "{when} was my birthday, and {giver} got me {gift}. I'm still grinning."],
  coreHas: ['when', 'gift'],
  react: ['Happy belated birthday!!', 'Aww, happy birthday!', 'Ahh, that is so lovely.'],
  probes: [
    { kind: 'single-hop', q: ['What did {P} get for {his} birthday?', "What was {P}'s birthday present?"], text: 'giftWord' },
    { kind: 'temporal', q: ['When did {P} celebrate {his} birthday?', "On which date was {P}'s birthday?"] },
  ],
  distract: ['I never know what to get people for their birthday.|Socks. Always socks.', "My nephew's birthday party had a magician, it was chaos.|Ha, did the magician survive?", 'Birthday cake for breakfast is a valid choice, right?|The only valid choice.'],
};

const CAUSES = ['slipped on wet leaves', 'fell off a kerb like an idiot', 'missed the last step on the stairs', 'tripped over a shopping basket'];

// ------------------------------------------------------------------ hobbies as facts

function habitSpec(h: Hobby, switches: boolean): FactSpec {
  return {
    key: `habit:${h.id}`, mood: 'plain',
    core: [
      '{day}s are sacred for me. {habit} every week without fail.',
      'Honestly, the best bit of my week is {day}. {habit} and forget about everything else.',
      "Every {day} without fail, {habit}. It's what keeps me sane.",
      "I'm a bit stiff today, but {day} is my favourite day. {habit} on {day}s, it's my reset button.",
    ],
    invite: {
      prompt: ["Are you free on {day}? There's a quiz on at the pub.", 'Fancy getting food on {day}?', 'Want to come round for dinner on {day}?', "Any chance you're free on {day}? I need help moving a wardrobe."],
      core: ["I can't do {day}, sorry, {habit} on {day}s and I never miss it.|No worries! Another time.", 'Ah, {day} is no good, {habit} on {day}s. Another day?|Of course! Next week?', 'Can we do another day? {habit} on {day}s.|Ha, of course. I forgot.'],
    },
    coreHas: ['day', 'word'],
    react: ['Ha, I love that you have a thing.', "That's such a good routine.", "Oh nice, I didn't know that!", 'Respect the commitment.'],
    probes: switches ? [] : [{ kind: 'single-hop', q: ['What does {P} do every {day}?', 'How does {P} usually spend {his} {day}s?', "What is {P}'s regular {day} activity?"], text: 'word' }],
    later: switches ? undefined : { q: ["How's the {noun} going?", 'Still enjoying the {noun}?'], a: ["Good! I'm getting slightly less terrible.", 'Loving it. Everyone there is so nice.', 'Great! It is the highlight of my week.'] },
    distract: [...HOBBY_DISTRACT, ...DAY_DISTRACT],
    traits: h.traits,
  };
}
function startSpec(h: Hobby): FactSpec {
  return {
    key: `start:${h.id}`, mood: 'good', when: 'day', split: 0.8, evening: true,
    after: ["Ha, that's brilliant.", 'Honestly, iconic.', 'Look at you, a natural.'],
    core: ['Guess what, I {did} {when}!', "So {when} I {did}. I think I'm hooked.", 'I {did} {when}, which is very unlike me.', 'Okay, proud moment: {when} I {did}.', '{when} I {did}, and I loved it.'],
    ask: [h.q],
    answer: [h.a],
    coreHas: ['when', 'word'], detailHas: ['x'],
    react: ["Oh I've always wanted to try {noun}!", 'Look at you!'],
    probes: [
      { kind: 'temporal', q: [`When did {P} ${h.first}?`] },
      { kind: 'single-hop', detail: true, q: [h.probe], text: 'x' },
    ],
    later: { q: ["How's the {noun} going?", 'Are you still enjoying the {noun}?'], a: ["Really well! I'm slightly less terrible now.", "Loving it. I've told everyone at work about it, they're sick of me."] },
    distract: HOBBY_DISTRACT,
    traits: h.traits,
  };
}
const SWITCH: FactSpec = {
  key: 'switch', mood: 'plain',
  core: [
    "I've swapped my {day}s over to {noun}, the old thing just wasn't fun any more.",
    'Small life update: I gave up my old {day} thing and signed up for {noun} instead.',
    "I don't do my old {day} routine any more, it's {noun} now and I love it.",
    'New {day} plan: {noun}! I needed a change.',
  ],
  coreHas: ['day', 'word'],
  react: ['Ooh, a new era!', 'Good for you, life is too short.', 'Ha, I did wonder.'],
  probes: [{ kind: 'update', q: ['What does {P} do on {day}s now?', "What has {P} switched {his} {day} routine to?", 'These days, how does {P} spend {his} {day}s?'], text: 'word', reject: 'oldWord' }],
};

// ------------------------------------------------------------------ plans, told ahead and asked about after

interface PlanKind {
  key: string;
  gist: string;
  core: readonly string[];
  tq: readonly string[];
  ask: readonly string[];
  tell: readonly string[];
  answer: readonly string[];
  detail: string;
  pool: readonly string[];
  q: readonly string[];
}
const PLANS: readonly PlanKind[] = [
  {
    key: 'camping', gist: 'camping',
    core: ["We're going camping {when}, if the weather behaves.", "I've booked a camping trip, we go {when}. Wish me luck with the tent.", "{when} we're finally going camping. I've bought a tiny stove and everything."],
    tq: ['Which month was {P} planning to go camping?', "When was {P}'s camping trip booked for?"],
    ask: ['Did you end up going camping?', 'Wait, did the camping trip happen in the end?', 'Did you survive the camping trip?'],
    tell: ['Oh, I never told you about the camping trip!', 'So the camping trip happened!'],
    answer: ['Yes! We pitched up near {cplace}, and it only rained once.', "Yes! Two nights near {cplace}. I've never been so cold or so happy.", 'Yes, finally! We found a spot by {cplace}, the stars were unreal.'],
    detail: 'cplace', pool: CAMP_PLACES,
    q: ['Where did {P} end up pitching the tent?', 'Where did {P} stay on the camping trip?'],
  },
  {
    key: 'festival', gist: 'the festival',
    core: ["I've got tickets for a folk festival {when}!", "We're off to a little music festival {when}, so excited.", "We're going to a folk festival {when}! I've already planned my outfit."],
    tq: ['Which month was {P} going to the festival?', "When was {P}'s festival weekend?"],
    ask: ['How was the festival?', 'Did you survive the festival?'],
    tell: ['Okay, I have to tell you about the festival.', 'Festival report!'],
    answer: ['Muddy but amazing. The best bit was {fbit}.', 'So good! {^fbit} was the highlight.'],
    detail: 'fbit', pool: ['a ceilidh at midnight', 'a brass band playing in the rain', 'the pie stall', 'a silent disco in a field'],
    q: ['What was the highlight of the festival for {P}?', 'What did {P} enjoy most at the festival?'],
  },
  {
    key: 'getaway', gist: 'the getaway',
    core: ["We're going to {gplace} {when}, I've been counting down the days.", "I've booked a few days in {gplace}, we go {when}!"],
    tq: ['When was {P} planning to visit {gplace}?', 'In which month was {P} due to go to {gplace}?'],
    ask: ['How was {gplace}?', 'Did you have a good time away?'],
    tell: ['We got back from {gplace}!', 'Right, {gplace} report.'],
    answer: ['Gorgeous. We mostly {gdo}.', 'So good. We {gdo} and did nothing else.'],
    detail: 'gdo', pool: ['ate our way round the markets', 'sat on the beach with books', 'took the little ferry out to the islands every day'],
    q: ['What did {P} spend the time away in {gplace} doing?'],
  },
];

function planItems(c: Conv, s: Side, plan: PlanKind, out: Item[]): void {
  const r = c.r;
  const v: Vals = { ...ownerVals(c, s), [plan.detail]: pick(r, plan.pool) };
  if (plan.key === 'getaway') v.gplace = draw(c, HOLIDAY_PLACES);
  let month: string | undefined;
  let toldAt = 0;
  const spec: FactSpec = {
    key: `plan:${plan.key}`, mood: 'good', when: 'next',
    core: plan.core, coreHas: plan.key === 'getaway' ? ['gplace', 'when'] : ['when'],
    react: ['Ooh, fun!', 'That sounds lovely.', 'Brave! I hope it stays dry.'],
    probes: [{ kind: 'temporal', q: plan.tq }],
    traits: plan.key === 'camping' ? ['outdoor'] : plan.key === 'festival' ? ['music'] : [],
  };
  const first = fact(c, s, uni(r, 0.05, 0.6), spec, v, {
    told(ev, m) {
      month = ev.when?.month;
      toldAt = m.day;
    },
  });
  out.push(first);
  // Asked about only once the planned month is over (or five weeks on, for "in a few weeks").
  const ready = (day: number): boolean => {
    if (month) {
      const [name, year] = month.split(' ');
      const mo = MONTHS.indexOf(name!);
      return day >= Date.UTC(Number(year), mo + 1, 1);
    }
    return day >= toldAt + 35 * DAY_MS;
  };
  const follow: Item = {
    owner: s, pos: first.pos + 0.2, after: first, ready, meeting: -1, distract: [],
    tell(m, next) {
      const x = other(s);
      const lines: Line[] = [];
      if (next === x) {
        lines.push({ by: x, text: say(c, x, plan.ask, v), tag: 'q' });
      } else {
        lines.push({ by: s, text: say(c, s, plan.tell, v), tag: 'q' });
        lines.push({ by: x, text: pick(r, ['Oh yes! How was it?', 'Yes! Tell me everything.', 'Ooh, go on.']) });
      }
      const answer = say(c, s, plan.answer, v);
      holds(answer, v, [plan.detail], 'answer');
      lines.push({ by: s, text: answer, tag: 'a' });
      if (r() < 0.6) lines.push({ by: x, text: pick(r, AFTER.good) });
      return {
        lines,
        done(ids) {
          const ev = [ids.q!, ids.a!];
          draft(c, 'single-hop', plan.q, v, ev, { expectText: [v[plan.detail]!] });
          const planEv = c.reg.get(`${s}:plan:${plan.key}`);
          if (planEv && plan.key === 'camping') draft(c, 'multi-hop', ['Did the camping trip {P} was planning go ahead, and where did {he} stay?'], v, [planEv.lead, ...ev], { expectText: [v[plan.detail]!] });
          if (planEv && plan.key === 'festival') draft(c, 'multi-hop', ['Which festival moment did {P} rave about after planning the trip for weeks?'], v, [planEv.lead, ...ev], { expectText: [v[plan.detail]!] });
          if (plan.key === 'camping') for (const id of ev) addTrait(c, s, 'outdoor', id);
        },
      };
    },
  };
  out.push(follow);
}

// ------------------------------------------------------------------ a persona: 10-16 life facts, events and changes

function persona(c: Conv, s: Side, shared: Hobby): Item[] {
  const r = c.r;
  const out: Item[] = [];
  const me = c.people[s];

  // Work, and maybe a new job later.
  const j1 = draw(c, JOBS, (j) => j.company);
  const years = pick(r, ['two', 'three', 'six', 'nine']);
  const changesJob = r() < 0.5;
  const job = fact(c, s, uni(r, 0, 0.35), jobSpec(changesJob), { ...j1, years });
  out.push(job);
  if (changesJob) {
    const j2 = draw(c, JOBS, (j) => j.company);
    out.push(fact(c, s, uni(r, 0.5, 0.9), JOB2, { ...j2, oldWord: j1.word }, {
      after: job,
      gist: 'starting at {company}',
      told(ev) {
        const j = c.reg.get(`${s}:job`);
        if (j) draft(c, 'multi-hop', ['Where did {P} work before joining {company}?', 'Which company employed {P} before {company}?'], { ...ownerVals(c, s), ...j2 }, [j.lead, ev.lead], { expectText: [j1.word] });
      },
    }));
  }

  // Where they live, where they grew up, maybe a move.
  const town1 = draw(c, TOWNS);
  const moves = r() < 0.4;
  const town = fact(c, s, uni(r, 0, 0.3), townSpec(moves), { town: town1 });
  out.push(town);
  if (moves) {
    const town2 = draw(c, TOWNS);
    out.push(fact(c, s, uni(r, 0.45, 0.85), MOVE, { town2, town1 }, {
      after: town,
      gist: 'moving to {town2}',
      told(ev) {
        const t = c.reg.get(`${s}:town`);
        if (t) draft(c, 'multi-hop', ['Where did {P} live before {town2}?', 'Which town did {P} leave when moving to {town2}?'], { ...ownerVals(c, s), town2 }, [t.lead, ev.lead], { expectText: [town1] });
      },
    }));
  }
  out.push(fact(c, s, uni(r, 0.05, 0.6), HOME, { home: draw(c, TOWNS) }));

  // Family.
  const partner = r() < 0.5 ? drawThird(c) : undefined;
  let partnerItem: Item | undefined;
  if (partner) {
    const rel = pick(r, partner[1] === 'f' ? ['wife', 'girlfriend', 'partner'] : ['husband', 'boyfriend', 'partner']);
    const [colour, colourWord] = pick(r, COLOURS);
    partnerItem = fact(c, s, uni(r, 0, 0.6), PARTNER, { partner: partner[0], rel, colour, colourWord }, { told: () => c.known[s].push(partner[0]) });
    out.push(partnerItem);
  }
  const sibs: { rel: string; item: Item; t: readonly [string, Sex] }[] = [];
  for (const rel of ['sister', 'brother'] as const) {
    if (r() >= (rel === 'sister' ? 0.55 : 0.45)) continue;
    const t = draw(c, THIRDS, (x) => x[0], (x) => x[1] === (rel === 'sister' ? 'f' : 'm'));
    const kj = draw(c, KIN_JOBS, (k) => k.job);
    const item = fact(c, s, uni(r, 0, 0.7), sibSpec(rel), { ...them('sib', t[0], t[1]), rel, job: kj.job, jobWord: kj.word, hint: kj.hint }, {
      told: () => c.known[s].push(t[0]),
    });
    sibs.push({ rel, item, t });
    out.push(item);
  }
  if (sibs.length && r() < 0.35) {
    const sib = pick(r, sibs);
    const girl = r() < 0.5;
    const baby = draw(c, THIRDS, (x) => x[0], (x) => x[1] === (girl ? 'f' : 'm'));
    out.push(fact(c, s, Math.min(0.98, sib.item.pos + uni(r, 0.15, 0.4)), babySpec(girl), {
      ...them('sib', sib.t[0], sib.t[1]), rel: sib.rel, baby: baby[0], babyKind: girl ? 'girl' : 'boy', nibling: girl ? 'niece' : 'nephew', aunt: me.sex === 'f' ? 'auntie' : 'uncle',
    }, { after: sib.item, gist: "the arrival of {his} {rel}'s baby" }));
  }
  if (r() < 0.3) {
    const son = r() < 0.5;
    const kid = draw(c, THIRDS, (x) => x[0], (x) => x[1] === (son ? 'm' : 'f'));
    out.push(fact(c, s, uni(r, 0.1, 0.7), KID, { ...them('kid', kid[0], kid[1]), rel: son ? 'son' : 'daughter', x: pick(r, ['dinosaurs', 'a swimming pool', 'a slide', 'a class hamster']) }));
  }
  if (r() < 0.4) {
    const par = r() < 0.5 ? 'mum' : 'dad';
    const [pastime, pastimeWord] = draw(c, PASTIMES, (p) => p[0]);
    out.push(fact(c, s, uni(r, 0.1, 0.8), PARENT, { ...them('par', par, par === 'mum' ? 'f' : 'm'), pastime, pastimeWord }));
  }

  // Pets.
  const allergen = r() < 0.3 ? pick(r, ALLERGENS) : undefined;
  let pet: Item | undefined;
  const petName = (): readonly [string, Sex] => {
    const n = draw(c, PET_NAMES);
    return [n, r() < 0.5 ? 'f' : 'm'];
  };
  const species = (xs: readonly Species[]): Species | undefined => {
    const ok = xs.filter((x) => !(allergen === 'cats' && x === CAT) && x !== firstKind);
    return ok.length ? pick(r, ok) : undefined;
  };
  let firstPet: string | undefined;
  // A second animal of the same kind would make "what is her dog called" ambiguous.
  let firstKind: Species | undefined;
  if (r() < 0.55) {
    const sp = species([DOG, CAT, CAT, DOG, RABBIT, TORTOISE])!;
    const n = petName();
    firstPet = n[0];
    firstKind = sp;
    pet = fact(c, s, uni(r, 0, 0.4), petSpec(sp === DOG), { ...them('pet', n[0], n[1]), kind: sp.kind, breed: pick(r, sp.breeds), mess: pick(r, sp.mess) });
    out.push(pet);
  }
  const sp2 = r() < 0.4 ? species([DOG, CAT]) : undefined;
  if (sp2) {
    const sp = sp2;
    const n = petName();
    out.push(fact(c, s, uni(r, 0.3, 0.85), { ...ADOPT, traits: sp === DOG ? ['dog'] : [] }, { ...them('pet', n[0], n[1]), kind: sp.kind, young: sp.young, breed: pick(r, sp.breeds) }, {
      after: pet,
      gist: 'getting the new {kind}',
      told(ev) {
        const p = c.reg.get(`${s}:pet`);
        if (p && firstPet) draft(c, 'multi-hop', ["What are the names of {P}'s pets?", "What are {P}'s two animals called?"], ownerVals(c, s), [p.lead, ...ev.ids], { expectText: [firstPet, n[0]] });
      },
    }));
  }

  // Hobbies: two regular ones (one maybe shared with the other person), one or two new ones, maybe a switch.
  const hobbyOk = (h: Hobby): boolean => h.id !== shared.id;
  const habits: Hobby[] = [];
  const sharing = r() < 0.75;
  habits.push(sharing ? shared : draw(c, HOBBIES, (h) => h.id, hobbyOk));
  habits.push(draw(c, HOBBIES, (h) => h.id, hobbyOk));
  const days = shuffle(r, [...WEEKDAYS]);
  const switchIdx = r() < 0.35 ? (habits[0] === shared ? 1 : int(r, 0, 1)) : -1;
  habits.forEach((h, i) => {
    const day = days[i]!;
    const item = fact(c, s, uni(r, 0, 0.55), habitSpec(h, i === switchIdx), { ...hobbyVals(h), day }, {
      told(ev) {
        c.habits[s].set(h.id, ev);
      },
    });
    out.push(item);
    if (i === switchIdx) {
      const h2 = draw(c, HOBBIES, (x) => x.id, hobbyOk);
      out.push(fact(c, s, Math.min(0.97, item.pos + uni(r, 0.25, 0.45)), SWITCH, { ...hobbyVals(h2), day, oldWord: h.word }, {
        after: item,
        told(ev) {
          const e = c.habits[s].get(h.id);
          if (e) draft(c, 'multi-hop', ['What did {P} do on {day}s before switching to {alt}?', 'Before taking up {alt}, how did {P} spend {his} {day}s?'], { ...ownerVals(c, s), day, alt: h2.alt }, [e.lead, ev.lead], { expectText: [h.word] });
          for (const t of h2.traits) addTrait(c, s, t, ev.lead);
        },
      }));
    }
  });
  const nStarts = r() < 0.7 ? 2 : 1;
  for (let i = 0; i < nStarts; i++) {
    const h = draw(c, HOBBIES, (x) => x.id, hobbyOk);
    out.push(fact(c, s, uni(r, 0.15, 0.85), startSpec(h), { ...hobbyVals(h), x: pick(r, h.xs) }, {
      told(ev) {
        c.starts[s].push({ h, ev });
      },
    }));
  }

  // Things they own.
  const owned = shuffle(r, [VAN, TELESCOPE, SEWING, CARGO, RECORDS]).slice(0, r() < 0.6 ? 1 : r() < 0.5 ? 2 : 0);
  for (const spec of owned) {
    const sight = pick(r, [["Saturn's rings", 'Saturn'], ['the craters on the moon', 'craters'], ['Jupiter and four of its moons', 'Jupiter']] as const);
    out.push(fact(c, s, uni(r, 0.1, 0.9), spec, {
      vname: pick(r, ['Marigold', 'Big Bertha', 'The Toaster', 'Pumpkin', 'Old Reliable']),
      sight: sight[0], sightWord: sight[1],
      make: pick(r, ['cushion covers', 'a tote bag', 'curtains for the spare room', 'a patchwork quilt']),
      bcolour: pick(r, ['bright orange', 'lime green', 'sunshine yellow', 'pillar-box red']),
      genre: pick(r, ['jazz', 'disco', 'folk', 'soul']),
    }, { gist: spec === VAN ? 'buying the campervan' : spec === CARGO ? 'getting the cargo bike' : undefined }));
  }

  // Tastes.
  const dislike = r() < 0.5 ? pick(r, FOODS) : undefined;
  if (dislike) out.push(fact(c, s, uni(r, 0, 1), DISLIKE, { food: dislike }));
  if (r() < 0.5) {
    const [drink, drinkWord] = pick(r, DRINKS);
    const switches = r() < 0.4;
    const d1 = fact(c, s, uni(r, 0, 0.5), switches ? { ...DRINK, probes: [] } : DRINK, { drink, drinkWord });
    out.push(d1);
    if (switches) {
      const [drink2, drink2Word] = pick(r, DRINKS.filter((d) => d[0] !== drink));
      out.push(fact(c, s, uni(r, 0.6, 0.95), DRINK2, { drink: drink2, drinkWord: drink2Word, oldWord: drinkWord }, {
        after: d1,
        told(ev) {
          const e = c.reg.get(`${s}:drink`);
          if (e) draft(c, 'multi-hop', ['What did {P} use to drink in the mornings before the switch?'], ownerVals(c, s), [e.lead, ev.lead], { expectText: [drinkWord] });
        },
      }));
    }
  }
  if (r() < 0.4) {
    const [cuisine, cuisineWord] = pick(r, CUISINES);
    out.push(fact(c, s, uni(r, 0, 1), CUISINE, { cuisine, cuisineWord }));
  }
  if (r() < 0.4) out.push(fact(c, s, uni(r, 0, 1), SEASON, { season: pick(r, SEASONS) }));
  if (allergen) out.push(fact(c, s, uni(r, 0, 1), allergySpec(allergen === 'cats'), { allergen }));
  if (r() < 0.35) out.push(fact(c, s, uni(r, 0, 1), r() < 0.5 ? OWL : LARK, {}));
  const veg = r() < 0.25;
  if (veg) out.push(fact(c, s, uni(r, 0, 0.8), VEG, { n: pick(r, ['five', 'ten', 'twelve', 'fifteen']) }));

  // Friends, in the third person.
  const friendSpecs = shuffle(r, [friendTrip, friendShop, friendEngaged]).slice(0, r() < 0.5 ? 2 : 1);
  for (const spec of friendSpecs) {
    const f = drawThird(c);
    const [fbest, fbestWord] = pick(r, [['the seafood was unreal', 'seafood'], ['the ferry ride was the highlight', 'ferry'], ['the cliffs were incredible', 'cliffs'], ['the night market was amazing', 'market']] as const);
    const [proposal, proposalWord] = pick(r, [['On a ferry in the rain', 'ferry'], ['At the top of a very steep hill', 'hill'], ['In a laundrette, of all places', 'laundrette'], ['Halfway through a pub quiz', 'pub quiz']] as const);
    out.push(fact(c, s, uni(r, 0, 1), spec, {
      ...them('f', f[0], f[1]), fplace: draw(c, HOLIDAY_PLACES), fbest, fbestWord, ftown: draw(c, TOWNS),
      shop: pick(r, ['bakery', 'bike repair shop', 'bookshop café', 'plant shop', 'tiny wine bar']), proposal, proposalWord,
    }));
  }

  // Dated events.
  const events = shuffle(r, ['race', 'concert', 'wedding', 'driving', 'quiz', 'dinner', 'trip', 'injury', 'birthday']).slice(0, int(r, 4, 5));
  for (const e of events) {
    const pos = uni(r, 0.05, 0.95);
    if (e === 'race') out.push(fact(c, s, pos, RACE, { time: pick(r, ['58 minutes', 'an hour and four minutes', '54 minutes', '61 minutes']) }, { gist: 'running {his} first 10k' }));
    if (e === 'concert') {
      const cf = drawThird(c);
      out.push(fact(c, s, pos, CONCERT, { band: draw(c, BANDS), band2: draw(c, BANDS), ...them('cf', cf[0], cf[1]) }, { gist: 'the {band} gig' }));
    }
    if (e === 'wedding') out.push(fact(c, s, pos, WEDDING, { cz: drawThird(c)[0], wtown: draw(c, TOWNS) }));
    if (e === 'driving') out.push(fact(c, s, pos, DRIVING, { attempt: pick(r, ['second', 'third', 'fourth']) }, { gist: 'passing {his} driving test' }));
    if (e === 'quiz') out.push(fact(c, s, pos, QUIZ, { team: draw(c, QUIZ_TEAMS) }, { gist: 'winning the pub quiz' }));
    if (e === 'dinner') {
      const [dish, dishWord] = pick(r, DISHES.filter((d) => !dislike || !d[0].includes(dislike)));
      out.push(fact(c, s, pos, DINNER, { dish, dishWord }, { gist: 'hosting the dinner party' }));
    }
    if (e === 'trip') {
      const [activity, activityWord] = pick(r, [['eating far too much cheese', 'cheese'], ['sitting in cafés reading', 'cafés'], ['visiting every museum we could find', 'museum'], ['lying on the beach doing nothing', 'beach'], ['going round the markets', 'markets']] as const);
      out.push(fact(c, s, pos, TRIP, { place: draw(c, HOLIDAY_PLACES), activity, activityWord }));
    }
    if (e === 'injury') {
      const cause = pick(r, CAUSES);
      out.push(fact(c, s, pos, INJURY, { part: pick(r, ['ankle', 'wrist', 'knee']), cause, weeks: pick(r, ['two', 'three', 'six']) }, { gist: 'spraining {his} {part}' }));
    }
    if (e === 'birthday') {
      const [gift, giftWord] = pick(r, GIFTS);
      // A partner gives the present only once the other person has heard of them.
      const byPartner = !!partnerItem && r() < 0.7;
      out.push(fact(c, s, pos, BIRTHDAY, { gift, giftWord, giver: byPartner ? partner![0] : 'my friends' }, { gist: '{his} birthday', after: byPartner ? partnerItem : undefined }));
    }
  }

  // Plans; a getaway and a past holiday would both answer "where did she go on holiday".
  const plans = shuffle(r, PLANS.filter((p) => p.key !== 'getaway' || !events.includes('trip')));
  for (const plan of plans.slice(0, r() < 0.5 ? 2 : 1)) planItems(c, s, plan, out);
  return out;
}

// ------------------------------------------------------------------ probes that join facts

const OPEN_Q: Record<Trait, readonly string[]> = {
  outdoor: ['Would {P} probably enjoy a weekend walking in the hills?', 'Is {P} the kind of person who would like a day out in the countryside?'],
  creative: ['Would {P} appreciate a box of art and craft supplies as a gift?', 'Is {P} likely to enjoy making things with {his} hands?'],
  music: ['Would {P} be likely to enjoy a night of live music?', 'Is {P} the type to sing along at a folk night?'],
  active: ['Would {P} be up for a sporty weekend away?', 'Does {P} seem like someone who enjoys a physical challenge?'],
  food: ['Would {P} appreciate a cookbook as a present?', 'Would {P} probably like a cookery evening as a gift?'],
  dog: ['Is {P} likely to be out walking every day, whatever the weather?', 'Would a pet-friendly holiday cottage suit {P}?'],
};

function joinProbes(c: Conv): void {
  const r = c.r;
  for (const s of [0, 1] as const) {
    const ov = ownerVals(c, s);
    const starts = c.starts[s];
    // A switch is a new hobby too, and would make "which two" ambiguous.
    if (starts.length >= 2 && !c.reg.has(`${s}:switch`)) {
      const [a, b] = [starts[0]!, starts[1]!];
      draft(c, 'multi-hop', ['Which two activities did {P} try for the first time?', 'What new pastimes did {P} try for the first time while they were chatting?'], ov, [a.ev.lead, b.ev.lead], { expectText: [a.h.word, b.h.word] });
    }
    const sister = c.reg.get(`${s}:sib:sister`);
    const brother = c.reg.get(`${s}:sib:brother`);
    if (sister && brother) draft(c, 'multi-hop', ["What do {P}'s siblings do for a living?", "What are the jobs of {P}'s brother and sister?"], ov, [...sister.ids, ...brother.ids]);
    // "Which came first": two day-resolved events told in different meetings.
    const dated = c.dated[s];
    const pairs: [typeof dated[number], typeof dated[number]][] = [];
    for (const x of dated) for (const y of dated) if (x.meeting < y.meeting && x.iso < y.iso) pairs.push([x, y]);
    if (pairs.length && r() < 0.8) {
      const [x, y] = pick(r, pairs);
      const [g1, g2] = r() < 0.5 ? [x.gist, y.gist] : [y.gist, x.gist];
      draft(c, 'multi-hop', [`Which came first for {P}: ${g1} or ${g2}?`, `Did ${g1} happen before or after ${g2}, for {P}?`], ov, [x.ev.lead, y.ev.lead]);
    }
    // Open questions: a couple of traits per person, answered by the turns that show them.
    const traits = shuffle(r, [...c.traits[s].entries()]).slice(0, 2);
    for (const [t, ids] of traits) draft(c, 'open', OPEN_Q[t], ov, ids.slice(0, 4));
  }
  // Something both enjoy, each saying so in a different meeting.
  for (const [id, e0] of c.habits[0]) {
    const e1 = c.habits[1].get(id);
    if (e1) draft(c, 'multi-hop', ['What hobby do {P} and {Q} have in common?', 'Which pastime do {P} and {Q} both enjoy?'], ownerVals(c, 0), [e0.lead, e1.lead], { expectText: [HOBBIES.find((h) => h.id === id)!.word] });
  }
  const pets = (s: Side): string[] => [c.reg.get(`${s}:pet`)?.lead, ...(c.reg.get(`${s}:adopt`)?.ids ?? [])].filter((x): x is string => x !== undefined);
  const [p0, p1] = [pets(0), pets(1)];
  if (p0.length && p1.length) draft(c, 'multi-hop', ['Which animals do {P} and {Q} each have at home?'], ownerVals(c, 0), [...p0, ...p1]);
}

// ------------------------------------------------------------------ meetings

function meeting(c: Conv, m: Meet, T: number, items: Item[], distract: string[]): { lines: Line[]; told: { start: number; t: Told }[] } {
  const r = c.r;
  const lines: Line[] = [];
  const told: { start: number; t: Told }[] = [];
  const next = (): Side => other(lines[lines.length - 1]!.by);
  const push = (by: Side, text: string): void => void lines.push({ by, text });
  let left = items.length;
  // Room for fillers, keeping 5 lines per item still to tell and 2 for the sign-off.
  const budget = (): number => T - lines.length - 2 - 5 * left;
  const filler = (max: number): void => {
    // A distractor whose reply was just used elsewhere ("Probably! Everything is these days") waits.
    const i = r() < 0.55 ? distract.findIndex((d) => d.split('|').length <= max && !d.split('|').slice(1).some((x) => recent(c, x))) : -1;
    if (i >= 0) {
      const parts = distract.splice(i, 1)[0]!.split('|');
      for (const x of parts.slice(1)) c.lastUsed.set(x, c.tick++);
      const by = next();
      parts.forEach((t, j) => push(j % 2 === 0 ? by : other(by), cap(t)));
      if (parts.length === 1) push(other(by), fresh(c, DISTRACT_REPLY));
    } else {
      const show = pick(r, SHOWS);
      const by = next();
      // Small talk is remembered for most of a conversation: a repeated anecdote stands out.
      fresh(c, SMALL_TALK, (x) => x.length <= max, 20 * RECENT).forEach((t, j) => push(j % 2 === 0 ? by : other(by), fill(t, { show })));
    }
  };

  const opener: Side = r() < 0.5 ? 0 : 1;
  const greet = m.hour < 12 && r() < 0.5 ? GREET_MORNING : m.hour >= 18 && r() < 0.4 ? GREET_EVENING : GREET;
  push(opener, say(c, opener, greet, {}));
  push(other(opener), say(c, other(opener), GREET_BACK, {}));
  const dow = new Date(m.day).getUTCDay();
  push(opener, fresh(c, GREET_THIRD, (t) => dow === 4 || dow === 5 || !t.includes('weekend')));

  // Catching up on something from an earlier meeting: the asker is whoever speaks next.
  if (budget() >= 3 && r() < 0.7) {
    const asker = next();
    const open = c.catchups.filter((x) => !x.used && x.after < m.k && x.owner !== asker);
    if (open.length) {
      const cu = pick(r, open);
      cu.used = true;
      push(asker, say(c, asker, cu.q, cu.v));
      push(cu.owner, say(c, cu.owner, cu.a, cu.v));
      if (r() < 0.5) push(asker, fresh(c, AFTER.plain));
    }
  }
  for (const it of items) {
    // A filler before the item, only if the item's own 5 lines (still counted in `left`) fit after it.
    if (budget() >= 2 && r() < 0.45) filler(Math.min(3, budget()));
    left--;
    const t = it.tell(m, next());
    told.push({ start: lines.length, t });
    lines.push(...t.lines);
  }
  while (budget() >= 2) filler(Math.min(3, budget()));
  if (budget() === 1) push(next(), fresh(c, FILLERS));
  const bye = next();
  const hi = c.known[bye];
  const evening = m.hour >= 18;
  const weekday = new Date(m.day).getUTCDay() % 6 !== 0;
  const signOff = m.hour >= 20 && r() < 0.6 ? SIGN_OFF_NIGHT : evening && r() < 0.6 ? SIGN_OFF_EVENING : weekday && m.hour >= 11 && m.hour < 14 && r() < 0.4 ? SIGN_OFF_LUNCH : weekday && m.hour >= 9 && m.hour < 17 && r() < 0.3 ? SIGN_OFF_WORK : SIGN_OFF;
  push(bye, say(c, bye, signOff, {}));
  push(other(bye), say(c, other(bye), hi.length && r() < 0.2 ? SIGN_BACK_HI : evening && r() < 0.5 ? SIGN_BACK_EVENING : SIGN_BACK, { name: hi.length ? pick(r, hi) : '' }));
  return { lines, told };
}

// ------------------------------------------------------------------ one conversation

/** `shape` draws the timeline (meetings, lengths, dates); `r` the content, so editing a template leaves the sizes alone. */
function conversation(r: Rand, shape: Rand, index: number, o: Required<ConversationOptions>): Conversations {
  const session = `conv-${String(index + 1).padStart(2, '0')}`;
  const a = pick(r, SPEAKERS);
  let b = pick(r, SPEAKERS);
  while (b[0] === a[0]) b = pick(r, SPEAKERS);
  const c: Conv = {
    r, people: [{ name: a[0], sex: a[1] }, { name: b[0], sex: b[1] }], used: new Set(), drafts: [], reg: new Map(), catchups: [],
    known: [[], []], traits: [new Map(), new Map()], starts: [[], []], habits: [new Map(), new Map()], dated: [[], []], tick: 0, lastUsed: new Map(),
  };
  const shared = pick(r, HOBBIES);
  c.used.add(shared.id);
  const items = [...persona(c, 0, shared), ...persona(c, 1, shared)].sort((x, y) => x.pos - y.pos);
  const M = int(shape, o.minSessions, Math.max(o.minSessions, o.maxSessions));
  // Distractors land in random meetings, before or after the fact they echo.
  const distractAt: string[][] = Array.from({ length: M }, () => []);
  for (const it of items) for (const d of it.distract) distractAt[int(r, 0, M - 1)]!.push(d);

  const turns: ConvTurn[] = [];
  let day = Date.UTC(2025, 0, 6) + int(shape, 0, 150) * DAY_MS;
  let carry: string[] = [];
  for (let k = 0; k < M; k++) {
    if (k > 0) day += int(shape, 2, 20) * DAY_MS;
    const T = int(shape, o.minTurnsPerSession, Math.max(o.minTurnsPerSession, o.maxTurnsPerSession));
    // Late enough to be plausible, early enough that the meeting ends the same day (turns <= 120 s apart).
    const hour = int(shape, 8, Math.max(8, Math.min(21, Math.floor(23 - (T * 120) / 3600))));
    const m: Meet = { k, day, hour };
    const cap = Math.max(1, Math.floor((T - 8) / 5));
    const ready = (it: Item): boolean => it.meeting < 0 && (!it.after || (it.after.meeting >= 0 && it.after.meeting < k)) && (!it.ready || it.ready(day));
    let chosen = items.filter((it) => ready(it) && it.pos <= (k + 1) / M).slice(0, cap);
    if (!chosen.length) {
      const early = items.find(ready);
      if (early && r() < 0.7) chosen = [early];
    }
    for (const it of chosen) it.meeting = k;
    const distract = [...carry, ...shuffle(r, distractAt[k]!)];
    const { lines, told } = meeting(c, m, T, chosen, distract);
    carry = distract.slice(0, 6);
    let t = day + hour * 3_600_000 + int(shape, 0, 59) * 60_000;
    const ids = lines.map((_, i) => `D${k + 1}:${i + 1}`);
    lines.forEach((l, i) => {
      if (i > 0) t += int(shape, 20, 120) * 1000;
      const who = c.people[l.by];
      turns.push({ session, turn: ids[i]!, role: l.by === 0 ? 'user' : 'assistant', speaker: who.name, text: l.text, at: new Date(t).toISOString() });
    });
    for (const { start, t: tl } of told) {
      const tags: Record<string, string> = {};
      tl.lines.forEach((l, i) => {
        if (l.tag) tags[l.tag] = ids[start + i]!;
      });
      tl.done(tags);
    }
  }
  joinProbes(c);
  return { turns, probes: chooseProbes(c, session, turns) };
}

/** Keeps every probe that is not a plain one-fact lookup (within caps), then fills up with those. */
function chooseProbes(c: Conv, session: string, turns: ConvTurn[]): ConvProbe[] {
  const r = c.r;
  const texts = turns.map((t) => t.text.toLowerCase());
  const order = new Map(turns.map((t, i) => [t.turn, i]));
  const seen = new Set<string>();
  const ok = c.drafts.filter((d) => {
    const q = d.query.toLowerCase();
    if (seen.has(q) || texts.some((t) => t.includes(q)) || !d.expect.every((id) => order.has(id))) return false;
    seen.add(q);
    return true;
  });
  for (const d of ok) {
    if (d.kind === 'update') {
      const ev = d.expect.map((id) => texts[order.get(id)!]!).join(' ');
      for (const x of d.rejectText ?? []) if (ev.includes(x.toLowerCase())) throw new Error(`conversations: update evidence repeats the old value: ${d.query}`);
    }
    if (d.kind !== 'temporal' && d.expectText) {
      const ev = d.expect.map((id) => texts[order.get(id)!]!).join(' ');
      for (const x of d.expectText) if (!ev.includes(x.toLowerCase())) throw new Error(`conversations: evidence lacks "${x}": ${d.query}`);
    }
  }
  const caps: Record<Kind, number> = { 'single-hop': 0, 'multi-hop': 10, temporal: 14, update: 99, open: 6 };
  const keep = new Set<Draft>();
  for (const k of ['update', 'multi-hop', 'temporal', 'open'] as const) for (const d of shuffle(r, ok.filter((x) => x.kind === k)).slice(0, caps[k])) keep.add(d);
  const target = int(r, 52, 64);
  for (const d of shuffle(r, ok.filter((x) => x.kind === 'single-hop')).slice(0, Math.max(0, target - keep.size))) keep.add(d);
  const last = (d: Draft): number => Math.max(...d.expect.map((id) => order.get(id)!));
  const chosen = ok.filter((d) => keep.has(d)).sort((x, y) => last(x) - last(y));
  for (const d of chosen) d.expect.sort((x, y) => order.get(x)! - order.get(y)!);
  const n: Partial<Record<Kind, number>> = {};
  return chosen.map((d) => {
    n[d.kind] = (n[d.kind] ?? 0) + 1;
    return { id: `${d.kind}:${session}:${n[d.kind]}`, session, query: d.query, expect: d.expect, kind: d.kind, ...(d.expectText ? { expectText: d.expectText } : {}), ...(d.rejectText ? { rejectText: d.rejectText } : {}) };
  });
}

/** Generates the conversations (see module comment). */
export function generateConversations(options: ConversationOptions = {}): Conversations {
  const o = { ...CONVERSATION_DEFAULTS, ...options };
  const r = rng(o.seed);
  const turns: ConvTurn[] = [];
  const probes: ConvProbe[] = [];
  for (let i = 0; i < o.conversations; i++) {
    const shape = rng((Math.imul(o.seed, 0x9e3779b1) ^ Math.imul(i + 1, 0x85ebca6b)) >>> 0);
    const one = conversation(r, shape, i, o);
    turns.push(...one.turns);
    probes.push(...one.probes);
  }
  return { turns, probes };
}

// ------------------------------------------------------------------ how much a keyword match gets for free

const STOPWORDS = new Set(
  'a an the is are was were be been being do does did what which who whom whose when where why how of in on at to for with from by and or s has have had that this it its his her he she him they their them would will likely probably about after before up as into than both two there now these those any some so if can could should most more every each'.split(' '),
);

/**
 * Over all probes: the mean share of a query's content words (lower-cased, minus stopwords and the
 * speakers' names) found in its evidence turns, and the share of probes where some non-evidence
 * turn of the same conversation holds more of them than the best evidence turn. `stem` compares
 * Porter stems (as a keyword index would), otherwise exact tokens.
 */
export function lexicalOverlap(c: Conversations, stem = false): { meanShare: number; beatenShare: number } {
  const norm = (w: string): string => (stem ? stemmer(w) : w);
  const words = (t: string): string[] => t.toLowerCase().split(/[^a-z0-9]+/).filter(Boolean);
  const bySession = new Map<string, ConvTurn[]>();
  for (const t of c.turns) bySession.set(t.session, [...(bySession.get(t.session) ?? []), t]);
  const bags = new Map<string, Set<string>>();
  for (const t of c.turns) bags.set(`${t.session}/${t.turn}`, new Set(words(t.text).map(norm)));
  let share = 0;
  let beaten = 0;
  for (const p of c.probes) {
    const ts = bySession.get(p.session) ?? [];
    const names = new Set(ts.map((t) => t.speaker.toLowerCase()));
    const q = [...new Set(words(p.query).filter((w) => !STOPWORDS.has(w) && !names.has(w)).map(norm))];
    if (!q.length) continue;
    const hits = (bag: Set<string>): number => q.filter((w) => bag.has(w)).length;
    const ev = new Set(p.expect);
    const union = new Set<string>();
    let best = 0;
    for (const id of p.expect) {
      const bag = bags.get(`${p.session}/${id}`)!;
      for (const w of bag) union.add(w);
      best = Math.max(best, hits(bag));
    }
    share += hits(union) / q.length;
    if (ts.some((t) => !ev.has(t.turn) && hits(bags.get(`${t.session}/${t.turn}`)!) > best)) beaten++;
  }
  const n = c.probes.length || 1;
  return { meanShare: share / n, beatenShare: beaten / n };
}
