// Fact-fidelity scenarios: three invented conversations between a user and a bot, each with value
// probes (questions whose right answer is one specific value, plus the stale or wrong values that
// must not rank above it). A memory that overwrites the wrong fact is worse than one that misses, so
// the probes check that each stated fact survives, that each real update replaces exactly the fact
// it is about, and that nothing the user never retracted is shown as replaced.
//
// Everything here is invented: people, streets, towns, bike makes. Phone numbers come only from the
// UK drama range 07700 900000 to 900999, email addresses only from the reserved example domains, and
// postcodes are impossible ones (ZZ99 9ZZ, ZZ98 1ZZ).
//
// How the data is written: each scenario is a list of visits (a start time and its lines). Lines
// alternate user, assistant, starting with the user; the builder numbers them t1, t2, ... and gives
// each a timestamp: the first line of a visit at the visit's start, a user line 35 s plus 1 s per 4
// characters after the line before it, an assistant line 3 s plus 1 s per 25 characters after. A line
// may carry a key; probes name turns by key, and the builder swaps the keys for turn ids (an unknown
// key throws when this module loads).
//
// Relative dates (kind 'relative-date'): the day of speaking is the UTC calendar date of the turn's
// `at` (every visit falls between 07:00 and 20:00 UTC, so it is the same date in the UK). "next
// Friday" (any weekday) is the first such weekday strictly after the day of speaking; "tomorrow" is
// the day after it. The expected value is that date as YYYY-MM-DD, which no turn spells out, so for
// these probes the memory must resolve the date itself.

export interface FidelityTurn {
  session: string;
  turn: string;
  role: 'user' | 'assistant';
  text: string;
  at: string /* ISO-8601 */;
  speaker?: string;
}

export interface FidelityProbe {
  id: string;
  session: string;
  query: string;
  /** Turn ids that hold the right answer (the latest statement of it). */
  expect: string[];
  /** Case-insensitive substrings; the recalled value must contain at least one. */
  expectText: string[];
  /** Case-insensitive substrings of stale/wrong values that must not rank above the right one (may be empty). */
  rejectText: string[];
  /** Ask right after this turn instead of at the end (optional). */
  after?: string;
  kind: 'kept' | 'updated' | 'multi-fact' | 'not-retracted' | 'correction' | 'relative-date' | 'assistant-commitment';
  /** One line: what this probe guards against. */
  why: string;
}

export interface FidelityScenario {
  name: string;
  description: string;
  turns: FidelityTurn[];
  probes: FidelityProbe[];
}

// ---------------------------------------------------------------------------------------------
// Builder

interface Line {
  role: 'user' | 'assistant';
  text: string;
  key?: string;
}
interface Visit {
  /** ISO-8601 UTC time of the visit's first line. */
  start: string;
  lines: Line[];
}
/** A probe as written below: `expect` and `after` name turn keys; the session is filled in. */
type ProbeSpec = Omit<FidelityProbe, 'session' | 'expect' | 'after'> & { expect: string[]; after?: string };

const u = (text: string, key?: string): Line => (key === undefined ? { role: 'user', text } : { role: 'user', text, key });
const a = (text: string, key?: string): Line =>
  key === undefined ? { role: 'assistant', text } : { role: 'assistant', text, key };

const iso = (ms: number): string => new Date(ms).toISOString().replace('.000Z', 'Z');

function scenario(name: string, description: string, visits: Visit[], specs: ProbeSpec[]): FidelityScenario {
  const session = `fidelity-${name}`;
  const turns: FidelityTurn[] = [];
  const ids = new Map<string, string>();
  for (const visit of visits) {
    let at = Date.parse(visit.start);
    if (Number.isNaN(at)) throw new Error(`${name}: bad visit start ${visit.start}`);
    visit.lines.forEach((line, j) => {
      if (j > 0) at += line.role === 'user' ? (35 + Math.ceil(line.text.length / 4)) * 1000 : (3 + Math.ceil(line.text.length / 25)) * 1000;
      const turn = `t${turns.length + 1}`;
      if (line.key !== undefined) {
        if (ids.has(line.key)) throw new Error(`${name}: duplicate turn key ${line.key}`);
        ids.set(line.key, turn);
      }
      turns.push({ session, turn, role: line.role, text: line.text, at: iso(at) });
    });
  }
  const id = (key: string): string => {
    const turn = ids.get(key);
    if (turn === undefined) throw new Error(`${name}: unknown turn key ${key}`);
    return turn;
  };
  const probes = specs.map(({ expect, after, ...rest }): FidelityProbe => {
    const probe: FidelityProbe = { ...rest, session, expect: expect.map(id) };
    if (after !== undefined) probe.after = id(after);
    return probe;
  });
  return { name, description, turns, probes };
}

// ---------------------------------------------------------------------------------------------
// 1. A language tutor bot: a student learning Italian, September to October 2025.

const TUTOR = scenario(
  'tutor',
  'An Italian tutor bot and a student over five weeks: a level that rises, a lesson day moved on request, an exam moved to another month, ' +
    'a tutor preference changed in one half of a two-part sentence, corrections phrased several ways, an allergy nobody retracts, a relative ' +
    'date and a booking made by the bot.',
  [
    {
      start: '2025-09-01T17:30:00Z', // Monday
      lines: [
        u("Hi! I'd like to start Italian lessons. My name is Maren Holt.", 'name'),
        a('Ciao Maren, welcome! Tell me a bit about where you are with Italian and why you want to learn it.'),
        u("I'm at A2 level, I think. I did a placement test in the spring.", 'levelA2'),
        a('A2 is a good base to build on. What is your goal?'),
        u("I'm moving to Turin for work next year, so I need to be properly conversational by then.", 'reason'),
        a('Turin, lovely. We will focus on everyday conversation and work vocabulary. What do you do?'),
        u("I'm a hospital pharmacist, so medicine names and talking to patients would be really useful.", 'job'),
        a("Perfect, I'll add some pharmacy vocabulary. Any preferences about your tutor or how lessons run?"),
        u('I prefer a female tutor, and I like grammar explained in English.', 'prefs'),
        a("Noted on both: I'll match you with a female tutor, and grammar notes will come in English.", 'prefsAck'),
        u('Can I have my weekly lessons on Tuesdays? Around 6pm works best after my shift.', 'tueReq'),
        a(
          "Done, you're booked in for Tuesdays at 6pm, starting next week on the 9th. We also run an in-person session at the centre " +
            'on the first Thursday of each month, with coffee and snacks.',
          'tueAck',
        ),
        u("I'm allergic to peanuts, so no nut snacks at the in-person sessions please.", 'allergy'),
        a("Noted: no nut snacks at the in-person sessions. I've flagged your allergy to all the tutors.", 'allergyAck'),
        u('Thanks. Should I do anything before the first lesson?'),
        a("Try writing five sentences about your weekend in the past tense. Don't worry about mistakes."),
      ],
    },
    {
      start: '2025-09-04T19:10:00Z', // Thursday
      lines: [
        u("Ciao! Quick question: why is it 'sono andata' but 'ho mangiato'?"),
        a(
          'In the passato prossimo most verbs take avere, but verbs of motion or change of state, like andare, venire, partire and nascere, ' +
            "take essere. With essere the participle agrees with the subject, so you say 'sono andata'.",
        ),
        u("So my brother would say 'sono andato'?"),
        a("Exactly. And a group of women would say 'siamo andate'."),
        u('Got it. How much homework should I be doing? I can do about 2 hours of homework a week.', 'hours2'),
        a("2 hours a week is a solid amount. I'll split it into short daily tasks."),
        u('sorry, I meant 3 hours, not 2.', 'hours3'),
        a("Even better. I'll plan 3 hours of homework a week, about 25 minutes a day.", 'hours3Ack'),
        u('Where will the tutor send it? My email is maren.h@example.com', 'email1'),
        a("Thanks, I'll send the homework there."),
        u('scratch that, my email is maren.holt.studies@example.org, I never check the other one.', 'email2'),
        a('No problem, homework will go to maren.holt.studies@example.org.', 'email2Ack'),
        u('And please send homework as PDFs, I like to print them out and write on them.', 'pdf'),
        a('Will do, PDFs it is. Would you like a phone number on file too, in case a lesson moves at short notice?'),
        u('Yes, my number is 07700 900456.', 'phone1'),
        a("Saved. We'll only use it if something changes at the last minute."),
      ],
    },
    {
      start: '2025-09-09T07:40:00Z', // Tuesday
      lines: [
        u("Buongiorno! I've signed up for the B1 exam in Italian. My exam is on the 14th of October.", 'examOct'),
        a("That's about five weeks away, so we'll build speaking practice into every lesson. In bocca al lupo!", 'examOctAck'),
        u("Eek. Also, what's the difference between 'il' and 'lo'?"),
        a(
          "Use 'lo' before s plus a consonant, z, gn and ps: 'lo studente', 'lo zaino'. Otherwise use 'il': 'il libro'. " +
            "The plurals are 'gli' and 'i': 'gli studenti', 'i libri'.",
        ),
        u('There is an Italian conversation meetup at the library on Sunday morning. Is it worth going?', 'meetSun'),
        a("Absolutely, it's great practice. Prepare a few questions in advance so you never run dry."),
        u("no wait, it's Saturday not Sunday. Ten o'clock.", 'meetSat'),
        a('Saturday at ten, then. Try to ask at least three people where they are from.', 'meetSatAck'),
      ],
    },
    {
      start: '2025-09-13T11:20:00Z', // Saturday
      lines: [
        u('I went to the meetup this morning. It was fun, but I froze a bit.'),
        a('That is completely normal the first time. What did you talk about?'),
        u('Mostly food. Cooking is my favourite thing to talk about, so I was fine there.', 'cooking'),
        a("Great, then cooking will be our go-to topic for speaking practice."),
        u("Someone said 'penso che è vero' and someone else corrected it to 'penso che sia vero'. Which is right?"),
        a("'Penso che sia vero.' Verbs of opinion such as pensare che and credere che take the congiuntivo."),
        u("My friend Ilse's wedding is on the 18th of October and I want to give a short toast in Italian.", 'wedding'),
        a("What a lovely goal. We can write the toast together and practise it. 'Agli sposi!' is a classic ending."),
        u("Ilse is a translator, so she'll judge my grammar, haha.", 'ilseJob'),
        a("Then we'll make it flawless."),
      ],
    },
    {
      start: '2025-09-21T15:05:00Z', // Sunday
      lines: [
        u("Ciao! Heads up: I'm flying to see my grandmother next Friday, so I might be slow with homework that week.", 'flight'),
        a('Have a wonderful trip! Homework can wait. Is your grandmother Italian?'),
        u('Yes, she lives near Genoa. I want to surprise her by speaking Italian.'),
        a("She'll love that. Remember it's 'nonna' with a double n; 'nona' means ninth."),
        u("Ha, good to know. What's the difference between 'mi piace' and 'mi piacciono'?"),
        a("'Mi piace' goes with one thing or a verb, 'mi piace cucinare'; 'mi piacciono' goes with plural things, 'mi piacciono i funghi'."),
      ],
    },
    {
      start: '2025-09-29T18:40:00Z', // Monday
      lines: [
        u("I'm back! My grandmother cried when I spoke Italian to her."),
        a("That's wonderful. How is prep for your exam going?"),
        u("They moved it, it's in November instead.", 'examNov'),
        a('That gives you a few extra weeks, which is good news for your speaking.'),
        u('By the way, my phone number changed, the new one is 07700 900123.', 'phone2'),
        a("Thanks, I've updated your number to 07700 900123.", 'phone2Ack'),
        u("I'm also avoiding dairy this month, just trying it out.", 'dairy'),
        a("Noted. I'll let the tutors know before the next in-person session."),
      ],
    },
    {
      start: '2025-10-01T12:15:00Z', // Wednesday
      lines: [
        u('Work has got really busy on Tuesday evenings.', 'busyTue'),
        a('Sorry to hear that. Would another day suit you better?'),
        u('Can we switch my lessons to Wednesday?', 'wedReq'),
        a('Done, from next week your lessons are on Wednesdays at 6pm, with the same tutor.', 'wedAck'),
        u('Could we also do a practice run of the speaking part before the exam?'),
        a('Yes, a mock oral exam is a good idea. I have the 27th of October or the 3rd of November, both at 10am.'),
        u('The 3rd, please.'),
        a("Great, I've booked your mock oral exam for the 3rd of November at 10am.", 'mock'),
      ],
    },
    {
      start: '2025-10-06T17:50:00Z', // Monday
      lines: [
        u("Good news, I redid the placement test and I'm now at B1 level!", 'levelB1'),
        a("Congratulazioni! That's a big jump in a month."),
        u("Actually, I'd prefer a male tutor from now on. I want to get used to different voices before Turin.", 'male'),
        a("No problem, I'll match you with a male tutor from Wednesday's lesson.", 'maleAck'),
        u('Could the tutor bring those lemon biscuits to the in-person session again? They were lovely.', 'lemon'),
        a("I'll pass that on."),
        u("Last thing: how do 'ci' and 'ne' work? Like 'ci vado' and 'ne ho due'?"),
        a("'Ci' replaces a place: 'Vai a Torino? Sì, ci vado.' 'Ne' replaces a quantity of something: 'Quanti fratelli hai? Ne ho due.'"),
      ],
    },
  ],
  [
    {
      id: 'tutor:name',
      query: "What is the student's name?",
      expect: ['name'],
      expectText: ['Maren'],
      rejectText: ['Ilse'],
      kind: 'kept',
      why: "The friend named later must not replace the student's own name.",
    },
    {
      id: 'tutor:job',
      query: 'What does the student do for work?',
      expect: ['job'],
      expectText: ['pharmacist'],
      rejectText: ['translator'],
      kind: 'kept',
      why: "A friend's job stated later must not be taken as the student's.",
    },
    {
      id: 'tutor:reason',
      query: 'Why is the student learning Italian?',
      expect: ['reason'],
      expectText: ['moving to Turin'],
      rejectText: [],
      kind: 'kept',
      why: 'A goal stated once in the first visit must survive five weeks of other facts.',
    },
    {
      id: 'tutor:topic',
      query: "What is the student's favourite topic to talk about?",
      expect: ['cooking'],
      expectText: ['cooking'],
      rejectText: [],
      kind: 'kept',
      why: 'A preference mentioned in passing while describing the meetup must still be stored.',
    },
    {
      id: 'tutor:homework-format',
      query: 'In what format does the student want homework sent?',
      expect: ['pdf'],
      expectText: ['PDF'],
      rejectText: [],
      kind: 'kept',
      why: 'The email correction right before it must not wipe the homework-format request.',
    },
    {
      id: 'tutor:allergy',
      query: 'What is the student allergic to?',
      expect: ['allergy'],
      expectText: ['peanut'],
      rejectText: ['dairy'],
      kind: 'not-retracted',
      why: 'Avoiding dairy for a month is not an allergy and must not replace the peanut allergy.',
    },
    {
      id: 'tutor:snacks',
      query: 'Which snacks must be kept out of the in-person sessions?',
      expect: ['allergy', 'allergyAck'],
      expectText: ['no nut snacks'],
      rejectText: ['lemon biscuits'],
      kind: 'not-retracted',
      why: 'A later request for lemon biscuits at the sessions must not overwrite the no-nut-snacks rule.',
    },
    {
      id: 'tutor:tutor-female',
      query: 'What kind of tutor does the student prefer?',
      expect: ['prefs', 'prefsAck'],
      expectText: ['female tutor'],
      rejectText: [],
      after: 'dairy',
      kind: 'multi-fact',
      why: 'The first of two preferences in one sentence must be stored and still hold weeks later, before the student changes it.',
    },
    {
      id: 'tutor:grammar-language',
      query: 'In which language does the student want grammar explained?',
      expect: ['prefs', 'prefsAck'],
      expectText: ['English'],
      rejectText: [],
      kind: 'multi-fact',
      why: 'Changing the tutor preference must not drop the grammar-in-English preference stated in the same sentence.',
    },
    {
      id: 'tutor:tutor-male',
      query: 'What kind of tutor does the student prefer now?',
      expect: ['male', 'maleAck'],
      expectText: ['male tutor'],
      rejectText: ['female tutor'],
      kind: 'updated',
      why: "The change of mind must replace the tutor preference ('female tutor' contains 'male tutor', so a hit with the stale value counts as stale).",
    },
    {
      id: 'tutor:level-early',
      query: 'What level is the student at?',
      expect: ['levelA2'],
      expectText: ['A2'],
      rejectText: ['B1'],
      after: 'examOctAck',
      kind: 'updated',
      why: 'Before the level changes, signing up for a B1 exam must not be read as being at B1.',
    },
    {
      id: 'tutor:level',
      query: 'What level is the student at?',
      expect: ['levelB1'],
      expectText: ['B1'],
      rejectText: ['A2'],
      kind: 'updated',
      why: 'The new level must replace the old one.',
    },
    {
      id: 'tutor:lesson-day-early',
      query: 'On which day are the weekly lessons?',
      expect: ['tueReq', 'tueAck'],
      expectText: ['Tuesday'],
      rejectText: [],
      after: 'tueAck',
      kind: 'updated',
      why: 'The first lesson day must be stored as soon as it is booked.',
    },
    {
      id: 'tutor:lesson-day',
      query: 'On which day are the weekly lessons?',
      expect: ['wedReq', 'wedAck'],
      expectText: ['Wednesday'],
      rejectText: ['Tuesday'],
      kind: 'updated',
      why: 'A change phrased as a request and confirmed by the bot must replace the old lesson day.',
    },
    {
      id: 'tutor:exam-early',
      query: "When is the student's exam?",
      expect: ['examOct'],
      expectText: ['14th of October'],
      rejectText: ['18th of October'],
      after: 'wedding',
      kind: 'not-retracted',
      why: 'Another date in the same month (the wedding) must not replace the exam date.',
    },
    {
      id: 'tutor:exam',
      query: "When is the student's exam?",
      expect: ['examNov'],
      expectText: ['November'],
      rejectText: ['October'],
      kind: 'updated',
      why: "A correction naming only the new month, with 'it' resolved by the bot's question, must replace the exam date.",
    },
    {
      id: 'tutor:wedding',
      query: "When is the student's friend's wedding?",
      expect: ['wedding'],
      expectText: ['18th of October'],
      rejectText: ['November'],
      kind: 'not-retracted',
      why: "The exam move ('they moved it') must not be applied to the wedding, the most recent date before it.",
    },
    {
      id: 'tutor:meetup',
      query: 'When is the Italian conversation meetup?',
      expect: ['meetSat', 'meetSatAck'],
      expectText: ['Saturday'],
      rejectText: ['Sunday morning'],
      kind: 'correction',
      why: "A terse 'no wait, X not Y' must replace the day just given.",
    },
    {
      id: 'tutor:homework-hours',
      query: 'How many hours of homework a week can the student do?',
      expect: ['hours3', 'hours3Ack'],
      expectText: ['3 hours'],
      rejectText: ['2 hours'],
      kind: 'correction',
      why: "A number corrected with 'sorry, I meant' must replace the first number.",
    },
    {
      id: 'tutor:email',
      query: "What is the student's email address?",
      expect: ['email2', 'email2Ack'],
      expectText: ['maren.holt.studies@example.org'],
      rejectText: ['maren.h@example.com'],
      kind: 'correction',
      why: "'scratch that' must replace the email given one turn earlier.",
    },
    {
      id: 'tutor:phone',
      query: "What is the student's phone number?",
      expect: ['phone2', 'phone2Ack'],
      expectText: ['900123'],
      rejectText: ['900456'],
      kind: 'correction',
      why: 'A changed phone number weeks later must replace the old one.',
    },
    {
      id: 'tutor:flight',
      query: 'When is the student flying to see their grandmother?',
      expect: ['flight'],
      expectText: ['2025-09-26'],
      rejectText: [],
      kind: 'relative-date',
      why: "'next Friday' said on Sunday 2025-09-21 must be resolved to the date, not stored as a phrase that drifts.",
    },
    {
      id: 'tutor:mock-exam',
      query: "When is the student's mock oral exam?",
      expect: ['mock'],
      expectText: ['3rd of November'],
      rejectText: ['27th of October'],
      kind: 'assistant-commitment',
      why: "A booking made in the bot's own words must be remembered, not the option the student turned down.",
    },
  ],
);

// ---------------------------------------------------------------------------------------------
// 2. A plant nursery help desk: a customer with a cat, September to October 2025.

const NURSERY = scenario(
  'nursery',
  'A plant nursery help desk and a customer over five weeks: a delivery slot moved twice (time, then day), an order quantity corrected, ' +
    'a bouquet frequency corrected, an address corrected, an allergy with its reason, two plants in two rooms of which one later moves, ' +
    "a neighbour's cat and a gift order of the very flower the customer must never receive.",
  [
    {
      start: '2025-09-15T10:05:00Z', // Monday
      lines: [
        u("Hello, I'd like to place an order for delivery. I'm Orla Fenwright.", 'name'),
        a('Hi Orla! Happy to help. What would you like?'),
        u("I'd like 4 bags of peat-free compost and two bags of bark chippings.", 'compost4'),
        a('Lovely. Is that for pots or beds?'),
        u("Beds mostly. My back garden is north-facing and the soil is heavy clay.", 'soil'),
        a('Peat-free compost dug into clay will help a lot. Any changes to the compost before I confirm?'),
        u('Yes, make it 6 bags, not 4.', 'compost6'),
        a('Updated: 6 bags of peat-free compost and two bags of bark chippings.', 'compost6Ack'),
        u('Great. Please deliver to 12 Marrowby Lane, Wrenhallow, ZZ99 9ZZ.', 'addr1'),
        a('Thanks. The first slot I have is Saturday 27 September, 8 to 10am. Shall I book it?'),
        u('Yes please.'),
        a('Booked: your delivery is Saturday 27 September, 8 to 10am.', 'slot1'),
        u('Please send order updates by text rather than email.', 'contact'),
        a('Will do, all updates will come to you by text.'),
      ],
    },
    {
      start: '2025-09-18T19:30:00Z', // Thursday
      lines: [
        u("Hi again. I've got a monstera in the lounge and a snake plant in the bathroom.", 'plants'),
        a('Two good choices. How are they doing?'),
        u("The monstera's leaves are curling. Is that too much sun or too little water?"),
        a(
          'Curling usually means it is thirsty or the air is dry. Water when the top few centimetres of soil are dry, and keep it out of ' +
            'direct afternoon sun.',
        ),
        u('Is it safe with my cat? Pickle chews anything green.', 'cat'),
        a(
          "Monstera and snake plant are both mildly toxic to cats if chewed, so keep them out of Pickle's reach. Spider plants and " +
            'calatheas are cat-safe alternatives.',
        ),
        u("I'll move them higher. Could I also set up a bouquet subscription? A bouquet every week would be nice.", 'weekly'),
        a('Happy to. Are there any flowers you would like us to avoid?'),
        u("I'm allergic to lilies, they make my eyes swell, so please never include them in bouquets.", 'lily'),
        a("Understood: no lilies in any of your bouquets, ever. I've added a note to your account.", 'lilyAck'),
        u('sorry, I meant fortnightly, not weekly. Once a week would be too many flowers.', 'fortnight'),
        a("No problem, I've set it to a bouquet every fortnight, starting Friday 3 October.", 'fortnightAck'),
      ],
    },
    {
      start: '2025-09-23T08:45:00Z', // Tuesday
      lines: [
        u('Morning. Can we move the delivery to the afternoon, 2 to 4pm? Same day.', 'slot2'),
        a('Done: Saturday 27 September, now 2 to 4pm.', 'slot2Ack'),
        u('Thanks. The snake plant has one yellow leaf at the base. Should I worry?'),
        a('One yellow leaf usually means overwatering. Snake plants like to dry out completely between waterings.'),
        u('Oops, I water it every week.'),
        a('Cut back to every three weeks or so and it should recover.'),
      ],
    },
    {
      start: '2025-09-26T13:10:00Z', // Friday
      lines: [
        u("Something's come up at the weekend. Could the delivery be on Monday 29 September instead, same afternoon slot?", 'slot3'),
        a('All sorted: your delivery is now Monday 29 September, 2 to 4pm.', 'slot3Ack'),
        u("Oh, and I've just realised I gave you my old address. We moved in August; the new one is 3 Quillan Court, Fernleigh Cross, ZZ98 1ZZ.", 'addr2'),
        a("Good catch! I've changed the delivery address to 3 Quillan Court, Fernleigh Cross, ZZ98 1ZZ.", 'addr2Ack'),
        u("I've moved the monstera into the bedroom, it gets much better light in there.", 'monsteraMove'),
        a('Good move. Bright, indirect light is exactly what it wants.'),
      ],
    },
    {
      start: '2025-10-02T17:20:00Z', // Thursday
      lines: [
        u("My neighbour's cat, Dusty, keeps digging in my beds. Are there plants that put cats off?", 'dusty'),
        a('Cats tend to dislike strongly scented plants such as rosemary and lavender. A layer of your bark chippings helps too.'),
        u('I will try rosemary. Could you also send a bouquet to my sister for her birthday? She loves lilies, so lilies are perfect for her.', 'sisterReq'),
        a('What a lovely idea. Which date would you like it delivered?'),
        u('Friday 10 October, please. I will text you her address.'),
        a(
          "I've booked a gift bouquet of white lilies for your sister, delivered on Friday 10 October. Your own bouquets stay lily-free.",
          'sisterAck',
        ),
        u('Perfect, thank you.'),
        a("You're welcome, Orla."),
      ],
    },
    {
      start: '2025-10-07T09:30:00Z', // Tuesday
      lines: [
        u('The first bouquet came on Friday and it is gorgeous. No lilies, thank you!'),
        a('So glad you like it!'),
        u("Do you sell cat-safe plants? I'd like a spider plant for the kitchen.", 'spiderReq'),
        a("Yes, we have spider plants in 12cm pots. I'll send one with your next bouquet on Friday 17 October.", 'spiderAck'),
        u('How often should I feed the monstera?'),
        a('Once a month in spring and summer with a diluted houseplant feed, and not at all over winter.'),
      ],
    },
    {
      start: '2025-10-13T15:45:00Z', // Monday
      lines: [
        u('Pickle keeps sniffing the monstera. Should I be worried?'),
        a('Keep an eye on it. If Pickle starts chewing the leaves, move the monstera up onto a shelf.'),
        u('And can I repot the snake plant now?'),
        a('Best to wait until spring; snake plants like being a bit pot-bound.'),
      ],
    },
    {
      start: '2025-10-20T11:00:00Z', // Monday
      lines: [
        u('My loyalty number is GRN-40718. Can you check my points?', 'loyalty'),
        a('You have 240 points, enough for a free bag of compost with your next order.'),
        u('Lovely. Can the next bouquet have some orange roses?'),
        a('Yes, orange roses in the next one, and still no lilies.'),
        u("Thanks, that's all for now."),
        a('Take care, Orla, and say hello to Pickle.'),
      ],
    },
  ],
  [
    {
      id: 'nursery:name',
      query: "What is the customer's name?",
      expect: ['name'],
      expectText: ['Orla'],
      rejectText: [],
      kind: 'kept',
      why: 'The name given in the first line must survive the whole conversation.',
    },
    {
      id: 'nursery:cat',
      query: "What is the customer's cat called?",
      expect: ['cat'],
      expectText: ['Pickle'],
      rejectText: ['Dusty'],
      kind: 'kept',
      why: "The neighbour's cat must not replace the customer's own cat.",
    },
    {
      id: 'nursery:soil',
      query: "What kind of soil is in the customer's garden?",
      expect: ['soil'],
      expectText: ['clay'],
      rejectText: [],
      kind: 'kept',
      why: 'A detail given as an aside while ordering must still be stored.',
    },
    {
      id: 'nursery:contact',
      query: 'How does the customer want to receive order updates?',
      expect: ['contact'],
      expectText: ['by text'],
      rejectText: [],
      kind: 'kept',
      why: 'The contact preference must survive later, unrelated mentions of texting.',
    },
    {
      id: 'nursery:loyalty',
      query: "What is the customer's loyalty number?",
      expect: ['loyalty'],
      expectText: ['GRN-40718'],
      rejectText: [],
      kind: 'kept',
      why: 'An identifier stated once, in the last visit, must be stored exactly.',
    },
    {
      id: 'nursery:compost',
      query: 'How many bags of compost did the customer order?',
      expect: ['compost6', 'compost6Ack'],
      expectText: ['6 bags'],
      rejectText: ['4 bags'],
      kind: 'correction',
      why: "'make it 6 bags, not 4' must replace the compost quantity.",
    },
    {
      id: 'nursery:bark',
      query: 'How many bags of bark chippings did the customer order?',
      expect: ['compost4', 'compost6Ack'],
      expectText: ['two bags of bark'],
      rejectText: [],
      kind: 'not-retracted',
      why: 'The compost correction must change only the compost, not the bark ordered in the same sentence.',
    },
    {
      id: 'nursery:slot-booked',
      query: 'When is the delivery booked?',
      expect: ['slot1'],
      expectText: ['Saturday 27 September'],
      rejectText: [],
      after: 'slot1',
      kind: 'assistant-commitment',
      why: "A slot booked in the bot's words, after a bare 'Yes please', must be stored.",
    },
    {
      id: 'nursery:slot-time-moved',
      query: 'What time is the delivery?',
      expect: ['slot2', 'slot2Ack'],
      expectText: ['2 to 4pm'],
      rejectText: ['8 to 10am'],
      after: 'slot2Ack',
      kind: 'updated',
      why: 'Moving the delivery to the afternoon must replace the morning window.',
    },
    {
      id: 'nursery:slot-day',
      query: 'Which day is the delivery?',
      expect: ['slot3', 'slot3Ack'],
      expectText: ['Monday 29 September'],
      rejectText: ['Saturday 27 September'],
      kind: 'updated',
      why: 'The second move must replace the delivery day.',
    },
    {
      id: 'nursery:slot-time',
      query: 'What time window is the delivery?',
      expect: ['slot3', 'slot3Ack'],
      expectText: ['2 to 4pm'],
      rejectText: ['8 to 10am'],
      kind: 'not-retracted',
      why: "Moving only the day ('same afternoon slot') must keep the afternoon window, not bring back the first one.",
    },
    {
      id: 'nursery:address-first',
      query: 'What is the delivery address?',
      expect: ['addr1'],
      expectText: ['Marrowby Lane'],
      rejectText: [],
      after: 'addr1',
      kind: 'correction',
      why: 'Before it is corrected, the address as first given must be stored.',
    },
    {
      id: 'nursery:address',
      query: 'What is the delivery address?',
      expect: ['addr2', 'addr2Ack'],
      expectText: ['Quillan Court'],
      rejectText: ['Marrowby Lane', 'ZZ99 9ZZ'],
      kind: 'correction',
      why: 'The corrected address, street and postcode, must replace the old one.',
    },
    {
      id: 'nursery:bouquet-frequency',
      query: 'How often does the bouquet subscription deliver?',
      expect: ['fortnight', 'fortnightAck'],
      expectText: ['fortnight'],
      rejectText: ['every week'],
      kind: 'correction',
      why: "'sorry, I meant fortnightly, not weekly' must replace the frequency; a later watering remark says 'every week' too.",
    },
    {
      id: 'nursery:allergy',
      query: 'What is the customer allergic to?',
      expect: ['lily'],
      expectText: ['lilies'],
      rejectText: [],
      kind: 'not-retracted',
      why: 'A gift order of lilies for the sister must not be read as the allergy going away.',
    },
    {
      id: 'nursery:allergy-reason',
      query: 'Why does the customer avoid lilies?',
      expect: ['lily'],
      expectText: ['eyes swell'],
      rejectText: [],
      kind: 'multi-fact',
      why: 'The reason given in the same sentence as the allergy must be kept with it.',
    },
    {
      id: 'nursery:bouquet-rule',
      query: "Which flowers must never go in the customer's own bouquets?",
      expect: ['lily', 'lilyAck'],
      expectText: ['lilies'],
      rejectText: [],
      after: 'sisterAck',
      kind: 'not-retracted',
      why: "Right after a lily bouquet is booked for the sister, the never-lilies rule for the customer's own bouquets must still hold.",
    },
    {
      id: 'nursery:lounge-plant',
      query: 'Which plant does the customer keep in the lounge?',
      expect: ['plants'],
      expectText: ['monstera'],
      rejectText: [],
      after: 'lilyAck',
      kind: 'multi-fact',
      why: 'The first of two plant-and-room facts in one sentence must be stored.',
    },
    {
      id: 'nursery:snake-plant-room',
      query: 'Which room is the snake plant in?',
      expect: ['plants'],
      expectText: ['bathroom'],
      rejectText: ['bedroom', 'kitchen'],
      kind: 'multi-fact',
      why: 'Moving the monstera, and buying a plant for the kitchen, must not move the snake plant.',
    },
    {
      id: 'nursery:monstera-room',
      query: 'Which room is the monstera in now?',
      expect: ['monsteraMove'],
      expectText: ['bedroom'],
      rejectText: ['lounge'],
      kind: 'updated',
      why: "Moving one plant must replace that plant's room only.",
    },
    {
      id: 'nursery:sister-bouquet',
      query: "When will the sister's birthday bouquet be delivered?",
      expect: ['sisterAck'],
      expectText: ['10 October'],
      rejectText: ['17 October'],
      kind: 'assistant-commitment',
      why: "The bot's booking for the sister must be remembered and not confused with the next regular bouquet.",
    },
    {
      id: 'nursery:spider-plant',
      query: 'When will the spider plant arrive?',
      expect: ['spiderAck'],
      expectText: ['17 October'],
      rejectText: ['10 October'],
      kind: 'assistant-commitment',
      why: "A delivery promised in the bot's reply must be remembered with its own date.",
    },
  ],
);

// ---------------------------------------------------------------------------------------------
// 3. A bike workshop's booking bot: a customer with two bikes, October to November 2025.

const WORKSHOP = scenario(
  'workshop',
  "A bike workshop's booking bot and a customer with two bikes over five weeks: a service booked by the bot and later moved, a parts " +
    "order corrected, a fault located then corrected, a contact preference, a relative date, and the brother's bike and booking, which " +
    "must never become the customer's.",
  [
    {
      start: '2025-10-01T08:15:00Z', // Wednesday
      lines: [
        u("Hi, I'm Nadia Corran. I'd like to book a service.", 'name'),
        a('Morning Nadia! Which bike is it for?'),
        u("I've got two bikes, a Corvane Tourer for commuting and a Pennick Sprint for weekend rides.", 'bikes'),
        a('Nice pair. Which one needs the service?'),
        u("The Tourer. It's done about 3,000 miles since anyone last looked at it."),
        a('A full service would be sensible. I can do Tuesday 14 October at 9am or Wednesday 15 October at 2pm.'),
        u('Tuesday at 9, please.'),
        a('Booked: full service for your Corvane Tourer on Tuesday 14 October at 9am.', 'svc1'),
        u('Can you keep it under £120? Anything over that, check with me first.', 'budget'),
        a("Noted: we'll check with you before going over £120. What's the best number to reach you on?"),
        u("It's 07700 900814.", 'phone'),
        a('Thanks. Shall we text you when the bike is ready?'),
        u("I'd rather you call than text.", 'callPref'),
        a("No problem, we'll always call.", 'callAck'),
      ],
    },
    {
      start: '2025-10-06T18:20:00Z', // Monday
      lines: [
        u('Hi, the Sprint is making a clicking noise from the front wheel when I pedal hard.', 'front'),
        a('Clicking under load can be a loose wheel or the hub. Does it happen when you freewheel as well?'),
        u('Sorry, it is the rear wheel, not the front. It only clicks when I pedal.', 'rear'),
        a('That points to the freehub or the cassette. We will take a look when it comes in. What size tyres are on it?', 'rearAck'),
        u("28mm, and they're worn. Could you order a new pair of 28mm tyres for the Sprint?", 'tyres28'),
        a("I've ordered two 28mm tyres for your Pennick Sprint; they should be here by Friday 10 October.", 'tyres28Ack'),
        u('The Sprint has a 56cm frame, in case that matters for anything.', 'frame'),
        a("Good to know, I've added it to the bike's record."),
      ],
    },
    {
      start: '2025-10-08T12:40:00Z', // Wednesday
      lines: [
        u("Actually, could you change the tyres to 30mm? I've started riding the towpath and the 28s feel too narrow.", 'tyres30'),
        a('Changed: the order is now two 30mm tyres for the Sprint, still due Friday 10 October.', 'tyres30Ack'),
        u("Will 30mm tyres fit the Sprint's frame?"),
        a('Most frames like it clear 30mm, but we will check the clearance before fitting.'),
        u('My brother rides a Vantor Trail, he says wide tyres changed his life.', 'brother'),
        a('Ha, they do make a big difference off-road.'),
        u('Can he bring it in too? It needs the brakes bled.'),
        a('Sure. I can do Saturday 18 October at 11am for his Vantor Trail.'),
        u('Book it, please. His name is Aled.'),
        a("Done: brake bleed for Aled's Vantor Trail on Saturday 18 October at 11am.", 'brotherSvc'),
      ],
    },
    {
      start: '2025-10-10T16:05:00Z', // Friday
      lines: [
        u('Are the tyres in yet?'),
        a('Yes, both 30mm tyres arrived this morning. Shall we fit them when you drop the Sprint off?'),
        u("Yes please. I'll drop the Sprint off tomorrow.", 'dropoff'),
        a('Great, we open at 8:30 tomorrow.'),
      ],
    },
    {
      start: '2025-10-13T07:55:00Z', // Monday
      lines: [
        u("I need to move the Tourer's service. Could it be Friday 17 October instead, same time?", 'svc2'),
        a("Moved: the Corvane Tourer's full service is now Friday 17 October at 9am.", 'svc2Ack'),
        u("Thanks. While it's in, can you check the dynamo hub? The front light flickers."),
        a('Will do, we will check the dynamo wiring and the light connector.'),
        u("How's the Sprint doing?"),
        a('The rear freehub was dry, so we cleaned and regreased it and the clicking has gone. The new tyres are on.'),
      ],
    },
    {
      start: '2025-10-22T17:30:00Z', // Wednesday
      lines: [
        u('Picked up the Tourer, it rides like new. Can you email me the receipt? It is nadia.corran@example.net.'),
        a('Sent to nadia.corran@example.net.'),
        u('I commute 12 miles each way on the Tourer. How often should it be serviced?', 'commute'),
        a('For a daily commute like that, a full service every six months and a quick check every couple of months is a good rhythm.'),
        u('Sounds good. Put me down for a reminder in April?'),
        a("Done, we'll call you in April about the next service."),
      ],
    },
    {
      start: '2025-10-28T12:10:00Z', // Tuesday
      lines: [
        u('Could you order a new chain for the Tourer? It is a 9-speed.'),
        a("I've ordered a 9-speed chain for your Tourer; it will be here by Monday 3 November.", 'chainAck'),
        u('Aled says thanks for the brakes, by the way.'),
        a('Glad to hear it!'),
        u("Can I leave the Sprint with you over winter? I won't ride it until March."),
        a('Yes, winter storage is £8 a month. Shall I put you down from Saturday 1 November?'),
        u('Yes please.'),
        a('Booked: winter storage for the Pennick Sprint from Saturday 1 November.', 'storage'),
      ],
    },
    {
      start: '2025-11-05T09:20:00Z', // Wednesday
      lines: [
        u("I've brought the Sprint in for storage, sorry it's a few days late. I've got the Tourer with me too. Is the chain in?"),
        a('Yes, the 9-speed chain is here. We can fit it while you wait, about 15 minutes.'),
        u("Lovely, I'll wait."),
        a('All done. The Tourer is ready to go.'),
      ],
    },
  ],
  [
    {
      id: 'workshop:name',
      query: "What is the customer's name?",
      expect: ['name'],
      expectText: ['Nadia'],
      rejectText: ['Aled'],
      kind: 'kept',
      why: "The brother's name must not replace the customer's.",
    },
    {
      id: 'workshop:phone',
      query: "What is the customer's phone number?",
      expect: ['phone'],
      expectText: ['900814'],
      rejectText: [],
      kind: 'kept',
      why: 'A number given once must be stored exactly and survive the later email address.',
    },
    {
      id: 'workshop:budget',
      query: 'What is the spending limit for the service before the workshop must check with the customer?',
      expect: ['budget'],
      expectText: ['£120'],
      rejectText: [],
      kind: 'kept',
      why: 'A limit stated once must survive the other prices mentioned later.',
    },
    {
      id: 'workshop:frame',
      query: 'What frame size is the Pennick Sprint?',
      expect: ['frame'],
      expectText: ['56cm'],
      rejectText: [],
      kind: 'kept',
      why: 'A measurement stated in passing must be stored against the right bike.',
    },
    {
      id: 'workshop:commute',
      query: 'How far does the customer commute?',
      expect: ['commute'],
      expectText: ['12 miles'],
      rejectText: ['3,000 miles'],
      kind: 'kept',
      why: "The commute distance must not be confused with the bike's mileage since its last service.",
    },
    {
      id: 'workshop:bikes-owned',
      query: 'Which bikes does the customer own?',
      expect: ['bikes'],
      expectText: ['Corvane Tourer', 'Pennick Sprint'],
      rejectText: ['Vantor'],
      kind: 'not-retracted',
      why: "The brother's bike must never be stored as the customer's own.",
    },
    {
      id: 'workshop:commuter-bike',
      query: 'Which bike does the customer use for commuting?',
      expect: ['bikes'],
      expectText: ['Corvane Tourer'],
      rejectText: ['Vantor'],
      kind: 'multi-fact',
      why: 'The first of two bikes described in one sentence must keep its own role.',
    },
    {
      id: 'workshop:weekend-bike',
      query: 'Which bike does the customer ride at weekends?',
      expect: ['bikes'],
      expectText: ['Pennick Sprint'],
      rejectText: ['Vantor'],
      kind: 'multi-fact',
      why: 'The second bike in the same sentence must be stored too, not overwritten by the first.',
    },
    {
      id: 'workshop:contact',
      query: 'How does the customer prefer to be contacted?',
      expect: ['callPref', 'callAck'],
      expectText: ['call'],
      rejectText: ['email'],
      kind: 'not-retracted',
      why: 'Asking for a receipt by email is not a new contact preference and must not replace "call rather than text".',
    },
    {
      id: 'workshop:service-booked',
      query: "When is the Corvane Tourer's service?",
      expect: ['svc1'],
      expectText: ['Tuesday 14 October'],
      rejectText: ['Wednesday 15 October'],
      after: 'svc1',
      kind: 'assistant-commitment',
      why: "The slot confirmed in the bot's words must be stored, not the option the customer did not pick.",
    },
    {
      id: 'workshop:service-before-move',
      query: "When is the customer's own service booking?",
      expect: ['svc1'],
      expectText: ['Tuesday 14 October'],
      rejectText: ['Saturday 18 October'],
      after: 'brotherSvc',
      kind: 'not-retracted',
      why: "Booking the brother's bike must not replace the customer's own booking.",
    },
    {
      id: 'workshop:service',
      query: "When is the Corvane Tourer's service?",
      expect: ['svc2', 'svc2Ack'],
      expectText: ['Friday 17 October'],
      rejectText: ['Tuesday 14 October', 'Saturday 18 October'],
      kind: 'updated',
      why: "The reschedule must replace the service day, and the brother's booking must not stand in for it.",
    },
    {
      id: 'workshop:service-time',
      query: "What time is the Corvane Tourer's service?",
      expect: ['svc2', 'svc2Ack'],
      expectText: ['9am'],
      rejectText: ['2pm'],
      kind: 'not-retracted',
      why: "Moving only the day ('same time') must keep 9am.",
    },
    {
      id: 'workshop:brother-service',
      query: "When is Aled's Vantor Trail booked in?",
      expect: ['brotherSvc'],
      expectText: ['Saturday 18 October'],
      rejectText: ['Friday 17 October'],
      kind: 'assistant-commitment',
      why: "The brother's booking, made by the bot, must survive the customer moving their own service.",
    },
    {
      id: 'workshop:tyres-first',
      query: 'What tyres were ordered for the Pennick Sprint?',
      expect: ['tyres28', 'tyres28Ack'],
      expectText: ['28mm'],
      rejectText: [],
      after: 'tyres28Ack',
      kind: 'assistant-commitment',
      why: "A parts order placed in the bot's reply must be stored as soon as it is made.",
    },
    {
      id: 'workshop:tyres',
      query: 'What tyres were ordered for the Pennick Sprint?',
      expect: ['tyres30', 'tyres30Ack'],
      expectText: ['30mm'],
      rejectText: ['28mm'],
      kind: 'correction',
      why: 'Changing the tyre width must replace the order, not add a second one.',
    },
    {
      id: 'workshop:noise',
      query: 'Which wheel of the Sprint is clicking?',
      expect: ['rear', 'rearAck'],
      expectText: ['rear wheel'],
      rejectText: ['front wheel'],
      kind: 'correction',
      why: "'the rear wheel, not the front' must replace the wheel named one turn earlier.",
    },
    {
      id: 'workshop:dropoff',
      query: 'When is the customer dropping off the Pennick Sprint?',
      expect: ['dropoff'],
      expectText: ['2025-10-11'],
      rejectText: [],
      kind: 'relative-date',
      why: "'tomorrow' said on Friday 2025-10-10 must be resolved to the date.",
    },
    {
      id: 'workshop:chain',
      query: 'When will the chain for the Tourer arrive?',
      expect: ['chainAck'],
      expectText: ['3 November'],
      rejectText: ['1 November'],
      kind: 'assistant-commitment',
      why: 'A delivery date promised by the bot must not be confused with the storage date booked minutes later.',
    },
    {
      id: 'workshop:storage',
      query: "When does the Pennick Sprint's winter storage start?",
      expect: ['storage'],
      expectText: ['1 November'],
      rejectText: ['3 November'],
      kind: 'assistant-commitment',
      why: "A booking confirmed after a bare 'Yes please' must be stored from the bot's own words.",
    },
  ],
);

export const FIDELITY_SCENARIOS: FidelityScenario[] = [TUTOR, NURSERY, WORKSHOP];
