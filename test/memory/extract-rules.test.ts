// The rule extractor, one rule at a time: the whole candidate each invented sentence gives (key, value,
// pattern and every flag), so a rule that matches too much, too little or builds its key wrongly fails
// here. Sentences come from the bike workshop, the plant nursery and the language tutor scenarios.

import { describe, expect, it } from 'vitest';
import { RuleExtractor, splitClauses, splitSentences, type Candidate } from '../../src/memory/extract.js';

const ex = new RuleExtractor();
const all = (text: string, previous?: string): Candidate[] => ex.extract(text, 'user', previous === undefined ? {} : { previous });
const one = (text: string, previous?: string): Candidate => {
  const cs = all(text, previous);
  expect(cs).toHaveLength(1);
  return cs[0]!;
};
/** The whole candidate a one-clause message gives: key, value, pattern, text and exactly these flags. */
const fact = (text: string, key: string, value: string, pattern: string, flags: Partial<Candidate> = {}): void => {
  expect(one(text), text).toEqual({ key, value, text, pattern, ...flags });
};
/** A sentence no rule reads: key = value = the sentence. */
const plain = (text: string): void => fact(text, text, text, 'sentence');

describe('splitClauses', () => {
  it('splits sentences at . ! ? followed by space, and at newlines, keeping decimals whole', () => {
    expect(splitSentences('First.  Second!   Third?')).toEqual(['First.', 'Second!', 'Third?']);
    expect(splitSentences('Line one\nLine two\n\nLine three')).toEqual(['Line one', 'Line two', 'Line three']);
    expect(splitSentences('It costs 10.50 today. Fine')).toEqual(['It costs 10.50 today.', 'Fine']);
    expect(splitSentences('Mr.Sand called')).toEqual(['Mr.Sand called']);
  });

  it('splits at semicolons and at a conjunction that starts a first-person statement', () => {
    expect(splitClauses('I paid; please confirm')).toEqual([
      { text: 'I paid', first: true },
      { text: 'please confirm', first: false },
    ]);
    expect(splitSentences('I left early, and I\'m fine')).toEqual(['I left early', "I'm fine"]);
    expect(splitSentences("She left and we're fine")).toEqual(['She left', "we're fine"]);
    expect(splitSentences('I came but our van broke')).toEqual(['I came', 'our van broke']);
    expect(splitSentences('I stayed since my bike was fixed')).toEqual(['I stayed', 'my bike was fixed']);
    expect(splitSentences("I'm tired because my bike broke")).toEqual(["I'm tired", 'my bike broke']);
    expect(splitSentences("It's late so please hurry")).toEqual(["It's late", 'please hurry']);
    expect(splitSentences("I'd like pots and I've got trays")).toEqual(["I'd like pots", "I've got trays"]);
    expect(splitSentences("Tea and I'd stay")).toEqual(['Tea', "I'd stay"]);
    expect(splitSentences("Soil and I've a trowel")).toEqual(['Soil', "I've a trowel"]);
  });

  it('does not split before a conjunction that starts someone else\'s statement, or inside a word', () => {
    expect(splitSentences('He ran and then I\'d stop')).toEqual(["He ran and then I'd stop"]);
    expect(splitSentences('Bread and jam')).toEqual(['Bread and jam']);
    expect(splitSentences('Bread and myrtle')).toEqual(['Bread and myrtle']);
    expect(splitSentences('The bike and wheels')).toEqual(['The bike and wheels']);
  });

  it('splits at ", so" and drops a leading "so"; empty pieces are left out', () => {
    expect(splitClauses('Ok, so I\'m here')).toEqual([
      { text: 'Ok', first: true },
      { text: "I'm here", first: false },
    ]);
    expect(splitClauses('we left, so')).toEqual([
      { text: 'we left', first: true },
      { text: 'so', first: false },
    ]);
    expect(splitClauses('So my pot is blue')).toEqual([{ text: 'my pot is blue', first: true }]);
    expect(splitClauses(';  ; hello')).toEqual([{ text: 'hello', first: false }]);
    expect(splitClauses('  ')).toEqual([]);
    expect(splitClauses('Also, soil')).toEqual([{ text: 'Also, soil', first: true }]);
  });
});

describe('RuleExtractor rules: names and contact details', () => {
  it('"call me on <number>" is a phone number, not a name', () => {
    fact('Please text me at +44 7700 900123.', 'my phone number (mobile)', '+44 7700 900123', 'contact');
    fact('Ring me on 0161-496-0000 after six', 'my phone number (mobile)', '0161-496-0000', 'contact');
    fact('You can reach me at 07700 900456', 'my phone number (mobile)', '07700 900456', 'contact');
    // Too short for a number: the name rule reads it.
    fact('Call me Bo 12', 'my name', 'Bo', 'name');
  });

  it('an introduction after a greeting, or two capitalised words, gives a name', () => {
    fact("Hello, I'm Nadia.", 'my name', 'Nadia', 'intro');
    fact('Good evening, this is Priya Rao', 'my name', 'Priya Rao', 'intro');
    fact('hey it’s Ola Berg', 'my name', 'Ola Berg', 'intro');
    fact('Morning, I am Kit', 'my name', 'Kit', 'intro');
    fact('I am Tomas Brenner, the new manager', 'my name', 'Tomas Brenner', 'intro');
    fact('This is Ada Moss', 'my name', 'Ada Moss', 'intro');
    // One capitalised word without a greeting is not an introduction ("I'm Italian").
    plain("I'm Italian.");
    plain("It's Ola.");
    plain('I am Tomas brenner');
  });

  it('"my name is", "call me", "name\'s": a second word joins the name only when capitalised', () => {
    fact('My name is dana', 'my name', 'dana', 'name');
    fact("I'm called Kit.", 'my name', 'Kit', 'name');
    fact('I am called Kit Moss', 'my name', 'Kit Moss', 'name');
    fact('You can call me Jo Ellis.', 'my name', 'Jo Ellis', 'name');
    fact("Name's Rudi", 'my name', 'Rudi', 'name');
    fact('my name’s Ana Sousa', 'my name', 'Ana Sousa', 'name');
    fact('Im called Zoë-Anne', 'my name', 'Zoë-Anne', 'name');
    fact('call me Dana please', 'my name', 'Dana', 'name');
  });

  it('"my X has changed (to) Y" keys the canonical topic and revises it', () => {
    fact('My email has changed to jo@example.com', 'my email address', 'jo@example.com', 'changed', { revises: true });
    fact('my usual delivery address has changed: 4 Mill Lane', 'my delivery address', '4 Mill Lane', 'changed', { revises: true });
    fact("My phone number has changed, now it's 07700 900999", 'my phone number (mobile)', '07700 900999', 'changed', { revises: true });
    fact('My phone number changed, the new one is 07700 900123.', 'my phone number (mobile)', '07700 900123', 'changed', { revises: true });
    fact('My postcode have changed it is now WX1 2AB', 'my postcode', 'WX1 2AB', 'changed', { revises: true });
    fact('my mobile changed - 07700 900777', 'my phone number (mobile)', '07700 900777', 'changed', { revises: true });
    fact('My email changed to now jo@example.com', 'my email address', 'now jo@example.com', 'changed', { revises: true });
    // Nothing after "changed", or a clause rather than a topic: not this rule.
    plain('My email changed');
    plain('my mind has changed');
    expect(one('my plan when we met changed everything').pattern).toBe('sentence');
  });

  it('"I\'d rather you call" and "please call rather than" say how to be contacted', () => {
    fact("I'd rather you text than call.", 'how I want to be contacted', 'text than call', 'contact', { revises: true });
    fact('I would rather you message me.', 'how I want to be contacted', 'message me', 'contact', { revises: true });
    fact("I'd rather you e-mail", 'how I want to be contacted', 'e-mail', 'contact', { revises: true });
    // What they want, and beside it what they do not, never run together ("email phone").
    fact('Please email me rather than phone!', 'how I want to be contacted', 'email (not phone)', 'contact', { revises: true });
    fact('please ring instead of texting', 'how I want to be contacted', 'ring (not texting)', 'contact', { revises: true });
    // Only the closing run of punctuation goes, all of it.
    fact("I'd rather you text me!!", 'how I want to be contacted', 'text me', 'contact', { revises: true });
    fact('Please email me rather than phone!!', 'how I want to be contacted', 'email (not phone)', 'contact', { revises: true });
    expect(all('Please email me rather than phone, e.g. at work')[0]!.value).toBe('email (not phone, e.g)');
  });
});

describe('RuleExtractor rules: who the speaker is', () => {
  it('a level said as "I\'m at X level" or "my level is X"', () => {
    fact('My level is now about B2+.', 'my level', 'B2+', 'level', { revises: true });
    fact('my level is intermediate', 'my level', 'intermediate', 'level');
    fact('my current level is C1', 'my level', 'C1', 'level');
    fact('I am currently at upper-intermediate level', 'my level', 'upper-intermediate', 'level');
    fact("I'm an advanced level", 'my level', 'advanced', 'level');
    fact('I am probably at an elementary+ level', 'my level', 'elementary+', 'level');
    fact("I'm about pre intermediate level", 'my level', 'pre intermediate', 'level');
    fact('I am beginner level', 'my level', 'beginner', 'level');
  });

  it('a job said as "I work as" or "I\'m a <trade>"', () => {
    fact('I work as an apprentice mechanic', 'my job (what I do for work)', 'apprentice mechanic', 'job');
    fact('I work as a nurse at the clinic', 'my job (what I do for work)', 'nurse at the clinic', 'job');
    fact('I am a student', 'my job (what I do for work)', 'student', 'job');
    fact("I'm a keen gardener", 'my job (what I do for work)', 'keen gardener', 'job');
    fact("I'm an old tram driver", 'my job (what I do for work)', 'old tram driver', 'job');
    fact('I am a vet', 'my job (what I do for work)', 'vet', 'job');
    fact("I'm a very tired person", "I'm a very tired person", "I'm a very tired person", 'sentence');
    // Without an article it is not a job ("I'm tutoring", "I'm doctoring the soil").
    plain("I'm doctor Moss's patient");
  });

  it('where the speaker lives, works, started work and comes from', () => {
    const home = 'my home address (where I live)';
    fact('We live near the old mill', home, 'the old mill', 'live-in');
    fact("I've just moved to Wexdale", home, 'Wexdale', 'live-in', { revises: true });
    fact("we're living in a flat in Hollins", home, 'a flat in Hollins', 'live-in');
    fact('I relocated to Brimley last spring', home, 'Brimley last spring', 'live-in');
    fact('I moved house to 9 Oak Row', home, '9 Oak Row', 'live-in');
    fact('I am living at 3 Quay Street', home, '3 Quay Street', 'live-in');
    fact('I have moved to Carlow', home, 'Carlow', 'live-in', { revises: true });
    fact('I work at the Fernhill garden centre', 'where I work', 'the Fernhill garden centre', 'work-at');
    fact("I'm working for Harrowgate Logistics", 'where I work', 'Harrowgate Logistics', 'work-at');
    fact('I am working in a bakery', 'where I work', 'a bakery', 'work-at');
    fact('I started at Cindermoor Games', 'where I work', 'Cindermoor Games', 'job-start');
    fact("I've just joined Harrowgate Logistics", 'where I work', 'Harrowgate Logistics', 'job-start');
    fact('I got a new job at Pellow Farm', 'where I work', 'Pellow Farm', 'job-start');
    fact('I got job with Orla Studios', 'where I work', 'Orla Studios', 'job-start');
    fact('I started working at Brimley Library', 'where I work', 'Brimley Library', 'job-start');
    fact('I have finally started a new job with Orla Studios', 'where I work', 'Orla Studios', 'job-start');
    fact('I started for Wren Bikes', 'where I work', 'Wren Bikes', 'job-start');
    plain('I joined the club');
    const town = 'my hometown (the town I am from, where I grew up)';
    fact("I'm originally from Leeds", town, 'Leeds', 'from');
    fact('I grew up in Carlow', town, 'Carlow', 'from');
    fact('I am from Porto', town, 'Porto', 'from');
  });

  it('what the speaker learns, is allergic to and eats', () => {
    const learn = 'what I am learning (language or subject I study)';
    fact("I'm learning Spanish", learn, 'Spanish', 'learning');
    fact('I am studying Portuguese at night', learn, 'Portuguese at night', 'learning');
    fact('I want to improve my French', learn, 'French', 'learning');
    fact('I want to get better at verbs', learn, 'verbs', 'learning');
    fact('I want to learn Welsh', learn, 'Welsh', 'learning');
    const allergy = 'what I am allergic to (my allergy)';
    fact("I'm severely allergic to wasp stings", allergy, 'wasp stings', 'allergy');
    fact('I am a bit allergic to pollen', allergy, 'pollen', 'allergy');
    fact('I have a reaction to latex', allergy, 'latex', 'allergy');
    fact('I have an allergy to nuts', allergy, 'nuts', 'allergy');
    fact('I react badly to penicillin', allergy, 'penicillin', 'allergy');
    fact('I am intolerant to lactose', allergy, 'lactose', 'allergy');
    fact("I'm vegan", 'my diet', 'vegan', 'diet');
    fact('I am a diabetic', 'my diet', 'diabetic', 'diet');
    fact("I'm gluten-free", 'my diet', 'gluten-free', 'diet');
    fact("I'm lactose intolerant", 'my diet', 'lactose intolerant', 'diet');
  });

  it('a diet said as "I\'m a vegetarian" is a diet, so it never replaces the job', () => {
    fact("I'm a vegetarian", 'my diet', 'vegetarian', 'diet');
    fact('I am a Pescatarian', 'my diet', 'Pescatarian', 'diet');
    expect(all("I'm a nurse. I'm a vegetarian.").map((c) => [c.key, c.value])).toEqual([
      ['my job (what I do for work)', 'nurse'],
      ['my diet', 'vegetarian'],
    ]);
    // A trade with a diet word in it is still a job.
    fact("I'm a vegetarian chef", 'my job (what I do for work)', 'vegetarian chef', 'job');
  });
});

describe('RuleExtractor rules: "my X is Y" and the topics it shares', () => {
  it('keys a noun-phrase topic as "my <topic>", and leaves a clause alone', () => {
    fact('My gate code is 4412', 'my gate code', '4412', 'my-x-is-y');
    fact("my Tourer's brakes were squeaking", "my tourer's brakes", 'squeaking', 'my-x-is-y');
    fact('My tomato plants will be ready soon', 'my tomato plants', 'ready soon', 'my-x-is-y');
    fact('My order has been dispatched', 'my order', 'dispatched', 'my-x-is-y');
    fact('My glasses are broken', 'my glasses', 'broken', 'my-x-is-y');
    fact('my bike is actually a Roamer', 'my bike', 'a Roamer', 'my-x-is-y', { revises: true });
    fact('My kids are Ana and Bo', 'my kids', 'Ana and Bo', 'my-x-is-y');
    plain('My office plant died while I was away');
    plain('My friend who visited is ill');
  });

  it('a joined "\'s" is "is" before what starts a value, and a possessive before a noun', () => {
    fact("My bike's a Corvane", 'my bike', 'a Corvane', 'my-x-is-y');
    fact("My bike’s in the shop", 'my bike', 'in the shop', 'my-x-is-y');
    fact("My mum's still a nurse", 'my mum', 'still a nurse', 'my-x-is-y');
    fact("My bike's saddle is torn", "my bike's saddle", 'torn', 'my-x-is-y');
  });

  it('one key for the common personal topics, whatever words name them', () => {
    const home = 'my home address (where I live)';
    const phone = 'my phone number (mobile)';
    fact('My address is 1 Rose Lane', home, '1 Rose Lane', 'my-x-is-y');
    fact('My home address is 1 Rose Lane', home, '1 Rose Lane', 'my-x-is-y');
    fact('my street address is 2 Hill Rd', home, '2 Hill Rd', 'my-x-is-y');
    fact('My postal address is 7 Elm Close', home, '7 Elm Close', 'my-x-is-y');
    fact('my new address is 12 Fern Road', home, '12 Fern Road', 'my-x-is-y');
    fact('my home is 4 Ash Way', home, '4 Ash Way', 'my-x-is-y');
    fact('my updated phone is 07700 900444', phone, '07700 900444', 'my-x-is-y');
    fact('my phone no is 07700 900555', phone, '07700 900555', 'my-x-is-y');
    fact('My telephone number is 0161 496 0001', phone, '0161 496 0001', 'my-x-is-y');
    fact('My contact number is 07700 900666', phone, '07700 900666', 'my-x-is-y');
    fact('My cell number is 07700 900222', phone, '07700 900222', 'my-x-is-y');
    fact('My number is 07700 900333', phone, '07700 900333', 'my-x-is-y');
    fact('My current mobile is 07700 900111', phone, '07700 900111', 'my-x-is-y');
    fact('My correct email is a@b.example', 'my email address', 'a@b.example', 'my-x-is-y');
    fact('My e-mail address is a@b.example', 'my email address', 'a@b.example', 'my-x-is-y');
    fact('My date of birth is 3 May 1990', 'my birthday (date of birth)', '3 May 1990', 'my-x-is-y');
    fact('my birth date is 4 June', 'my birthday (date of birth)', '4 June', 'my-x-is-y');
    fact('my birthday is 4 June', 'my birthday (date of birth)', '4 June', 'my-x-is-y');
    // Only the whole topic is an alias: "my phone case", "my old address book", "my home town" are their own.
    fact('My phone case is cracked', 'my phone case', 'cracked', 'my-x-is-y');
    fact('my address book is full', 'my address book', 'full', 'my-x-is-y');
    fact('my home town is Leeds', 'my home town', 'Leeds', 'my-x-is-y');
    fact('my email inbox is full', 'my email inbox', 'full', 'my-x-is-y');
    fact('my usual birthday cake is lemon', 'my birthday cake', 'lemon', 'my-x-is-y');
    fact('my actual number plate is WX12', 'my number plate', 'WX12', 'my-x-is-y');
  });

  it('a booked thing is keyed "my booking (<thing>)", singular, without its passing modifier', () => {
    fact('My weekly lessons are on Mondays', 'my booking (lesson)', 'on Mondays', 'my-x-is-y');
    fact('My first lesson is on Monday', 'my booking (lesson)', 'on Monday', 'my-x-is-y');
    fact('my next deliveries are on Fridays', 'my booking (delivery)', 'on Fridays', 'my-x-is-y');
    fact('my classes are on Tuesdays', 'my booking (class)', 'on Tuesdays', 'my-x-is-y');
    fact('My class is on Monday', 'my booking (class)', 'on Monday', 'my-x-is-y');
    fact('My appointments are on Wednesdays', 'my booking (appointment)', 'on Wednesdays', 'my-x-is-y');
    fact('My usual sessions are on Thursdays', 'my booking (session)', 'on Thursdays', 'my-x-is-y');
    fact('my regular pickup is on Friday', 'my booking (pickup)', 'on Friday', 'my-x-is-y');
    fact('my collection is Friday', 'my booking (collection)', 'Friday', 'my-x-is-y');
    fact('my reservation is Friday', 'my booking (reservation)', 'Friday', 'my-x-is-y');
    fact('my visit is Friday', 'my booking (visit)', 'Friday', 'my-x-is-y');
    fact('my service is Friday', 'my booking (service)', 'Friday', 'my-x-is-y');
    fact('My latest delivery is late', 'my booking (delivery)', 'late', 'my-x-is-y');
    // "services" is not in the list of booked things; "my bus" is not booked.
    fact('my services are due', 'my services', 'due', 'my-x-is-y');
    fact('My bus is late', 'my bus', 'late', 'my-x-is-y');
    fact('my service plan is basic', 'my service plan', 'basic', 'my-x-is-y');
  });

  it('an update that names its topic ("the exam got moved to May 3") addresses that topic', () => {
    fact('The exam got moved to May 3', 'my exam', 'May 3', 'update-moved-to', { updates: { kind: 'date', expr: 'May 3' } });
    fact('Our delivery has been pushed back to Friday', 'my booking (delivery)', 'Friday', 'update-moved-to', { updates: { kind: 'date', expr: 'Friday' } });
    fact('the oral exam has been postponed until June', 'my oral exam', 'June', 'moved-to');
    fact('The repair has been brought forward till Monday', 'my repair', 'Monday', 'moved-to');
    fact('the class was rescheduled for 10am', 'my booking (class)', '10am', 'update-moved-to', { updates: { kind: 'time', expr: '10am' } });
  });
});

describe('RuleExtractor rules: likings, possessions, other people, bookings', () => {
  it('a liking is keyed by the head of what is liked; likes add up, a preference does not', () => {
    fact('I really like ferns, mostly', 'what I like: ferns', 'ferns, mostly', 'prefer', { accumulate: true });
    fact('I love some more compost', 'what I like: compost', 'some more compost', 'prefer', { accumulate: true });
    fact('I like two trays of basil', 'what I like: basil', 'two trays of basil', 'prefer', { accumulate: true });
    fact('I like 3 pots', 'what I like: pots', '3 pots', 'prefer', { accumulate: true });
    fact('I like these mugs', 'what I like: mugs', 'these mugs', 'prefer', { accumulate: true });
    fact('I like your shop', 'what I like: shop', 'your shop', 'prefer', { accumulate: true });
    fact('I like an early slot', 'what I like: slot', 'an early slot', 'prefer', { accumulate: true });
    fact("I like Tess's shop", 'what I like: shop', "Tess's shop", 'prefer', { accumulate: true });
    fact('I like ferns (the big ones)', 'what I like: ferns', 'ferns (the big ones)', 'prefer', { accumulate: true });
    fact('I enjoy watering the seedlings', 'what I like: seedlings', 'watering the seedlings', 'prefer', { accumulate: true });
    fact('I also love ferns with big leaves', 'what I like: ferns', 'ferns with big leaves', 'prefer', { accumulate: true });
    fact('I still like it', 'what I like', 'it', 'prefer', { accumulate: true });
    fact('I like ferns instead', 'what I like: ferns', 'ferns instead', 'prefer', { accumulate: true, revises: true });
    fact("I'd really prefer a morning slot", 'what I prefer: slot', 'a morning slot', 'prefer');
    fact('I would much prefer Tuesdays', 'what I prefer: tuesdays', 'Tuesdays', 'prefer');
    fact('I PREFER Tuesdays', 'what I prefer: tuesdays', 'Tuesdays', 'prefer');
  });

  it('the head stops at a preposition, a conjunction, a participle or a clause word', () => {
    const head = (text: string) => one(text).key;
    expect(head('I like pots for herbs')).toBe('what I like: pots');
    expect(head('I like seeds from Wexdale')).toBe('what I like: seeds');
    expect(head('I like chats on Zoom')).toBe('what I like: chats');
    expect(head('I like walks at night')).toBe('what I like: walks');
    expect(head('I like books about moss')).toBe('what I like: books');
    expect(head('I like trams than buses')).toBe('what I like: trams');
    expect(head('I like mugs to drink from')).toBe('what I like: mugs');
    expect(head('I love ferns or moss')).toBe('what I like: ferns');
    expect(head('I like ferns so much')).toBe('what I like: ferns');
    expect(head('I like ferns because they are green')).toBe('what I like: ferns');
    expect(head('I like ferns if they are cheap')).toBe('what I like: ferns');
    expect(head('I like pots which drain')).toBe('what I like: pots');
    expect(head('I like tutors who explain')).toBe('what I like: tutors');
    expect(head('I like ferns please')).toBe('what I like: ferns');
    expect(head('I like ferns anymore')).toBe('what I like: ferns');
    expect(head('I like grammar explained in English')).toBe('what I like: grammar');
    expect(head('I like moss growing on stone')).toBe('what I like: moss');
    expect(head('I like ferns when they uncurl')).toBe('what I like: ferns');
    expect(head('I like the ones with red leaves')).toBe('what I like: ones');
    expect(head('I like repotting things')).toBe('what I like: things');
    expect(head('I like big-leaf ferns')).toBe('what I like: ferns');
    expect(head("I like O'Neill ferns")).toBe('what I like: ferns');
    expect(head('I like ferns: lots')).toBe('what I like: ferns');
    expect(head('I like 10 ferns')).toBe('what I like: ferns');
    expect(head('I like pots in a row')).toBe('what I like: pots');
    // Dislikes, with or without the apostrophe.
    expect(head("I can't stand aphids")).toBe('what I dislike: aphids');
    expect(head('I cant stand aphids')).toBe('what I dislike: aphids');
    expect(head("I don't like grammar drills")).toBe('what I dislike: drills');
    expect(head('I dont like drills')).toBe('what I dislike: drills');
    expect(head('I dislike the noise')).toBe('what I dislike: noise');
    expect(head('I hate slugs')).toBe('what I dislike: slugs');
    // "to <verb> ...": the verb is the head, not the last word.
    expect(head('I hate to print them out')).toBe('what I dislike: print');
    expect(head('I like to go out')).toBe('what I like: go');
    expect(head('I like to cycle to work')).toBe('what I like: cycle');
  });

  it('possessions are keyed by their noun; the verb stays in the key unless it is have/got/own/bought', () => {
    fact('I keep three hens in the yard', 'what I keep: my hens', 'hens in the yard', 'have', { accumulate: true });
    fact('I use the Orrin 2 for commuting', 'what I use: my orrin', 'Orrin 2 for commuting', 'have', { accumulate: true });
    fact('I got 2 tickets', 'my tickets', 'tickets', 'have', { accumulate: true });
    fact('I have a cargo bike', 'my bike', 'cargo bike', 'have', { accumulate: true });
    fact('I ride the 42', 'what I ride: my 42', '42', 'have', { accumulate: true });
    fact('I have a Wren, with a basket', 'my wren', 'Wren, with a basket', 'have', { accumulate: true });
    fact('I have a Vanner called Bess', 'my vanner', 'Vanner called Bess', 'have', { accumulate: true });
    fact('I have a bike and a trailer', 'my bike', 'bike and a trailer', 'have', { accumulate: true });
    fact('I own an e-bike, but rarely ride', 'my e-bike', 'e-bike, but rarely ride', 'have', { accumulate: true });
  });

  it('a clause after the noun ("a cat that I love") or a second number ("42 (or 43)") does not become the key', () => {
    fact('I have a cat that I love', 'my cat', 'cat that I love', 'have', { accumulate: true });
    fact('I ride the 42 (or 43)', 'what I ride: my 42', '42 (or 43)', 'have', { accumulate: true });
  });

  it('a possession whose noun is left out ("I have two in the shop") keeps the sentence, not a key guessed from later words', () => {
    plain('I have two in the shop right now');
    plain("I've got two with flat tyres");
    plain('I own three from the old fleet');
  });
});

describe('RuleExtractor rules: other people and bookings', () => {
  it('facts about someone else keep their owner in the key, and the verb when it is not "is"', () => {
    fact("Mel's daughter lives in Hull", "Mel's daughter (lives)", 'in Hull', 'their-x');
    fact("Priya's son started nursery last week", "Priya's son (started)", 'nursery last week', 'their-x');
    fact("Old Tom's shed has been repainted", "Old Tom's shed", 'repainted', 'their-x');
    fact("Jo's partner works nights", "Jo's partner (works)", 'nights', 'their-x');
    fact("Ana’s new bike is red", 'Ana’s new bike', 'red', 'their-x');
    fact("Ana's class begins at 6", "Ana's class (begins)", 'at 6', 'their-x');
    fact("Ana's dog was ill", "Ana's dog", 'ill', 'their-x');
    fact("Ana's dog restarts soon", "Ana's dog restarts soon", "Ana's dog restarts soon", 'sentence');
  });

  it('a booking with a date is keyed by the booked thing; its value is the request without "can I"', () => {
    fact('Can I book a full service for Tuesday?', 'my booking (service)', 'book a full service for Tuesday', 'booking');
    fact('Could we schedule the delivery for Friday?', 'my booking (delivery)', 'schedule the delivery for Friday', 'booking');
    fact('May you reserve it for Saturday!', 'my booking', 'reserve it for Saturday', 'booking');
    fact('The oral exam is scheduled for 3 June', 'my booking (exam)', 'The oral exam is scheduled for 3 June', 'booking');
    fact('The lessons got booked for 9 May', 'my booking (lesson)', 'The lessons got booked for 9 May', 'booking');
    fact('Our big group trip was reserved for 9 May', 'my booking (trip)', 'Our big group trip was reserved for 9 May', 'booking');
    fact('The plot was reserved for 9 May', 'my booking (plot)', 'The plot was reserved for 9 May', 'booking');
    fact('I booked for Friday', 'my booking', 'I booked for Friday', 'booking');
    fact('Can I change to the 9am class?', 'my booking (class)', 'change to the 9am class', 'booking');
    fact('Swap in a quick service on Monday', 'my booking (service)', 'Swap in a quick service on Monday', 'booking');
    fact('Book in an annual service on Monday', 'my booking (service)', 'Book in an annual service on Monday', 'booking');
    fact('Please arrange another service for Monday.', 'my booking (service)', 'Please arrange another service for Monday', 'booking');
    fact('I need a collection on Friday', 'my booking (collection)', 'I need a collection on Friday', 'booking');
    fact('We need a class on Monday', 'my booking (class)', 'We need a class on Monday', 'booking');
    fact('We need lessons on Monday', 'my booking (lesson)', 'We need lessons on Monday', 'booking');
    fact('Can we book for Friday?', 'my booking', 'book for Friday', 'booking');
    fact('Can you book me in for 3pm?', 'my booking', 'book me in for 3pm', 'booking');
    fact('Could I reserve a plot, ideally for Friday??', 'my booking (plot)', 'reserve a plot, ideally for Friday', 'booking');
    // Without a date or a number a booking rule match keeps no booking.
    plain('Can I book a service?');
  });
});

describe('RuleExtractor: remember cues and whom a fact is about', () => {
  it('"remember/note/don\'t forget/keep in mind (that) X" marks X remembered and reads X by the rules', () => {
    fact("Remember that I'm vegan", 'my diet', 'vegan', 'diet', { remember: true });
    expect(one('please remember my gate code is 4412')).toEqual({
      key: 'my gate code', value: '4412', text: 'please remember my gate code is 4412', pattern: 'my-x-is-y', remember: true,
    });
    fact("Keep in mind that I'm a nurse", 'my job (what I do for work)', 'nurse', 'job', { remember: true });
    fact("don't forget my bike is blue", 'my bike', 'blue', 'my-x-is-y', { remember: true });
    fact('Can you note that the shed key is under the pot', 'the shed key is under the pot', 'the shed key is under the pot', 'sentence', { remember: true });
    fact('Could you remember 2 trays', 'trays', '2 trays', 'with-quantity', { remember: true });
    expect(one('Remember   that  I am vegan ')).toEqual({ key: 'my diet', value: 'vegan', text: 'Remember   that  I am vegan', pattern: 'diet', remember: true });
    // A note with a colon is not the cue.
    fact("Make a note: I'm vegan", 'my diet', 'vegan', 'diet');
  });

  it('a sentence about a relation carries the relation as subject, except a name the speaker gives', () => {
    fact('My brother wants 8 plant labels too', 'My brother wants plant labels too', 'My brother wants 8 plant labels too', 'with-quantity', { subject: 'brother' });
    fact('My Friend Ana Rides a Wren', 'My Friend Ana Rides a Wren', 'My Friend Ana Rides a Wren', 'sentence', { subject: 'friend' });
    fact('By the way, our neighbour lives in Hull', 'By the way, our neighbour lives in Hull', 'By the way, our neighbour lives in Hull', 'sentence', { subject: 'neighbour' });
    fact('My boss says call me on 07700 900123', 'my phone number (mobile)', '07700 900123', 'contact', { subject: 'boss' });
    fact('My brother says to call me Dana', 'my name', 'Dana', 'name');
    fact('My sister, she rides', 'My sister, she rides', 'My sister, she rides', 'sentence');
  });
});

describe('RuleExtractor: updates and corrections', () => {
  it('an update without a named topic is keyed by what is left without the value and the cue words', () => {
    fact('Actually, can we move it to Friday instead?', ', can we move it to instead?', 'Actually, can we move it to Friday instead?', 'update', { updates: { kind: 'date', expr: 'Friday' } });
    fact('make it 4 trays', 'trays', 'make it 4 trays', 'update', { updates: { kind: 'quantity', expr: '4' } });
    fact('change the order to 6', 'the order', 'change the order to 6', 'update', { updates: { kind: 'quantity', expr: '6' } });
    fact('Can it be Friday instead?', 'Can it be ?', 'Can it be Friday instead?', 'update', { updates: { kind: 'date', expr: 'Friday' } });
    // Nothing left but cue words: the key is the sentence.
    fact('I meant 4', 'I meant 4', 'I meant 4', 'update', { updates: { kind: 'quantity', expr: '4' } });
    // Only the first cue's words go: "instead" stays after "make it".
    fact('Make it 5 instead', 'instead', 'Make it 5 instead', 'update', { updates: { kind: 'quantity', expr: '5' } });
  });

  it('an update that names its topic is keyed by that topic and says which rule named it', () => {
    fact('Could we move my lessons to Friday?', 'my booking (lesson)', 'Could we move my lessons to Friday?', 'update-booking', { updates: { kind: 'date', expr: 'Friday' } });
    fact('My exam is now on May 3', 'my exam', 'on May 3', 'update-my-x-is-y', { updates: { kind: 'date', expr: 'May 3' } });
    fact("I'm now at B2 level, I moved up 1 level", 'my level', 'B2', 'update-level', { updates: { kind: 'quantity', expr: '1' } });
  });

  it('a later clause is an update only when it says so ("actually", "instead", "I meant" or a correction word)', () => {
    const [paid, update] = all("I paid, and I'd make it 4 instead");
    expect(paid).toEqual({ key: 'I paid', value: 'I paid', text: 'I paid', pattern: 'sentence' });
    expect(update).toEqual({
      key: "I'd instead", value: "I'd make it 4 instead", text: "I'd make it 4 instead", pattern: 'update',
      updates: { kind: 'quantity', expr: '4' }, clause: true, context: 'I paid',
    });
    expect(all('I paid, and I meant 4')[1]).toEqual({
      key: 'I meant 4', value: 'I meant 4', text: 'I meant 4', pattern: 'update', updates: { kind: 'quantity', expr: '4' }, clause: true, context: 'I paid',
    });
    expect(all('I paid, and I actually want 4')[1]).toMatchObject({ pattern: 'update', updates: { kind: 'quantity', expr: '4' } });
    expect(all("I paid, and I'll switch it to 5")[1]).toEqual({ key: "I'll", value: "I'll switch it to 5", text: "I'll switch it to 5", pattern: 'with-quantity', clause: true });
    expect(all('I paid, and I changed it to 5')[1]).toMatchObject({ pattern: 'with-quantity', clause: true });
    expect(all('I paid, so sorry, make it 5')[1]).toMatchObject({ pattern: 'update', updates: { kind: 'quantity', expr: '5' }, clause: true });
  });

  it('a correction names the user\'s choice: its value kind when it has one, else the latest choice', () => {
    fact("no wait, it's Saturday not Sunday.", ", it's not Sunday.", "no wait, it's Saturday not Sunday.", 'update', { updates: { kind: 'date', expr: 'Saturday' } });
    fact('Sorry, Friday not Thursday', 'not Thursday', 'Sorry, Friday not Thursday', 'correction', { updates: { kind: 'date', expr: 'Friday' } });
    fact('Wait, 3 not 2', 'not 2', 'Wait, 3 not 2', 'correction', { updates: { kind: 'quantity', expr: '3' } });
    fact('Oops, the red one', 'the red one', 'Oops, the red one', 'correction', { updates: { kind: 'latest' } });
    fact('nope, the blue pot please', 'the blue pot please', 'nope, the blue pot please', 'correction', { updates: { kind: 'latest' } });
    fact('Nope — the small one', '— the small one', 'Nope — the small one', 'correction', { updates: { kind: 'latest' } });
    fact('Changed my mind, the big pot', ', the big pot', 'Changed my mind, the big pot', 'correction', { updates: { kind: 'latest' } });
    fact('I meant the green pot', 'the green pot', 'I meant the green pot', 'correction', { updates: { kind: 'latest' } });
    fact('on second thought, the green pot', ', the green pot', 'on second thought, the green pot', 'correction', { updates: { kind: 'latest' } });
    fact('That is not right, the green pot', 'That is , the green pot', 'That is not right, the green pot', 'correction', { updates: { kind: 'latest' } });
    // One content word is too little to say what is chosen; a question or a closing chooses nothing.
    plain('Oops, red');
    fact('Sorry, Friday not Thursday?', 'Sorry, not Thursday?', 'Sorry, Friday not Thursday?', 'with-date');
    plain("Sorry, that's all");
    plain('No, that is everything');
    plain('No, thanks, all I need');
  });
});

describe('RuleExtractor: a short answer takes its topic from the question', () => {
  const answer = (previous: string, text: string, key: string) =>
    expect(one(text, previous), `${previous} -> ${text}`).toEqual({ key, value: text, text, pattern: 'answer', context: previous });

  it('"your <detail>" gives the canonical topic, without "best/usual/current/new"', () => {
    answer('What is your usual postcode?', 'WX1 2AB', 'my postcode');
    answer('And your new email address, please?', 'jo@example.com', 'my email address');
    answer('Thanks. And your best mobile?', '07700 900814', 'my phone number (mobile)');
    answer('Your name?', 'Dana', 'my name');
    answer("What's your name?", 'ok', 'my name');
    answer("What's your current home address?", '4 Ash Way', 'my home address (where I live)');
  });

  it('"best/right number" and "number to call" ask for the phone number', () => {
    answer('What is the best number?', '07700 900111', 'my phone number (mobile)');
    answer('Right number to call?', '07700 900111', 'my phone number (mobile)');
    answer('Is there a number to text?', '07700 900111', 'my phone number (mobile)');
  });

  it('a question a rule reads gives the rule\'s key; otherwise the asking sentence is the key', () => {
    answer('When do you want the delivery?', 'Friday', 'my booking (delivery)');
    // The bot's own offer names the booked thing after "your": two offers are two bookings, not one.
    answer('Shall I book your service for Friday?', 'Yes', 'my booking (service)');
    answer('Can I book your tyres in for Monday?', 'Yes please', 'my booking (tyre)');
    answer('Which time? I can do 9am or 2pm.', '9am, thanks', 'I can do 9am or 2pm.');
    answer('Do you want a pot? We have lots.', 'Yes, 2', 'Do you want a pot?');
    answer('Let me know. Bye', '2 please', 'Let me know.');
    answer('How many   trays?', '3', 'How many trays?');
    answer('Would you like the Tourer serviced?', 'Yes, on Friday', 'Would you like the Tourer serviced?');
  });

  it('no answer after a statement, a question without content words, a question back, a long reply, or a later sentence', () => {
    plain('Fine');
    expect(one('Fine', 'OK?').pattern).toBe('sentence');
    expect(one('Dana Whitfield?', "What's your name?").pattern).toBe('sentence');
    expect(one('07700 900111', 'Give me the number to text.').pattern).toBe('sentence');
    expect(one('I told you already, it is on the booking form from last week with the rest', "What's your name?").pattern).toBe('sentence');
    expect(one('one two three four five six', 'Which words?')).toMatchObject({ pattern: 'answer', key: 'Which words?' });
    expect(one('one two three four five six seven', 'Which words?').pattern).toBe('sentence');
    const [first, second] = all('Dana. 07700 900111', 'Your name?');
    expect(first).toEqual({ key: 'my name', value: 'Dana.', text: 'Dana.', pattern: 'answer', context: 'Your name?' });
    expect(second).toEqual({ key: '07700 900111', value: '07700 900111', text: '07700 900111', pattern: 'sentence' });
    // A rule-read reply keeps its own key.
    expect(one("I'm vegan", 'Anything else?')).toEqual({ key: 'my diet', value: 'vegan', text: "I'm vegan", pattern: 'diet' });
    // A dated reply is an answer too; an update is not.
    expect(one('Friday at 9', 'When do you want the delivery?')).toMatchObject({ key: 'my booking (delivery)', pattern: 'answer' });
    expect(one('Friday instead', 'When do you want the delivery?')).toEqual({
      key: 'Friday instead', value: 'Friday instead', text: 'Friday instead', pattern: 'update', updates: { kind: 'date', expr: 'Friday' },
    });
  });
});

describe('RuleExtractor: spacing and punctuation people type', () => {
  it('extra spaces and missing ones split the same clauses', () => {
    // A new sentence opens with "and": it is still a first clause, not split again.
    expect(splitClauses('Thanks.  and I paid')).toEqual([
      { text: 'Thanks.', first: true },
      { text: 'and I paid', first: true },
    ]);
    expect(splitClauses('I paid;please confirm')).toEqual([
      { text: 'I paid', first: true },
      { text: 'please confirm', first: false },
    ]);
    expect(splitSentences("I left and  I'm fine")).toEqual(['I left', "I'm fine"]);
    expect(splitSentences('Ok,  so sure')).toEqual(['Ok', 'sure']);
    expect(splitClauses('So  my pot is blue')).toEqual([{ text: 'my pot is blue', first: true }]);
  });

  it('values lose trailing punctuation; names keep a second capitalised word across extra spaces', () => {
    fact('My bike is red!!', 'my bike', 'red', 'my-x-is-y');
    fact('My name is Dana  Whitfield', 'my name', 'Dana Whitfield', 'name');
    fact('my name is Dana mcNeil', 'my name', 'Dana', 'name');
    // Only the end of a contact preference loses its stop, not a time inside it.
    fact("I'd rather you text than call at 9.30", 'how I want to be contacted', 'text than call at 9.30', 'update-contact', { updates: { kind: 'quantity', expr: '9.30' } });
  });

  it('the head of a liked thing ignores punctuation and numbers, and stops only at whole words', () => {
    fact('I like ferns!', 'what I like: ferns', 'ferns', 'prefer', { accumulate: true });
    fact('I like ferns/moss', 'what I like: moss', 'ferns/moss', 'prefer', { accumulate: true });
    fact('I like the Corvane X3', 'what I like: x3', 'the Corvane X3', 'prefer', { accumulate: true });
    fact('I like plot 12', 'what I like: plot', 'plot 12', 'prefer', { accumulate: true });
    fact('I like ferns within reach', 'what I like: reach', 'ferns within reach', 'prefer', { accumulate: true });
  });

  it('a question whose rule match has no value gives the question as the topic', () => {
    // "my email changed " matches the changed-detail rule with a blank value: no topic from the rule.
    expect(one('Yes', 'Let me know if my email changed ')).toEqual({
      key: 'Let me know if my email changed', value: 'Yes', text: 'Yes', pattern: 'answer', context: 'Let me know if my email changed ',
    });
  });
});

describe('RuleExtractor: the booked thing', () => {
  const booked = (text: string) => one(text).key;

  it('is the first word after the verb, past an article, "in" and a common adjective', () => {
    expect(booked('Can I book a repair for Monday?')).toBe('my booking (repair)');
    expect(booked('Can we book repairs for Monday?')).toBe('my booking (repair)');
    expect(booked('Book  a repair for Monday')).toBe('my booking (repair)');
    expect(booked('Book in  a repair for Monday.')).toBe('my booking (repair)');
    expect(booked('Can I book a  repair for Monday?')).toBe('my booking (repair)');
    expect(booked('Can I book a full  repair for Monday?')).toBe('my booking (repair)');
    expect(booked('Can I book a cabin for Monday?')).toBe('my booking (cabin)');
    expect(booked('Can I book a tour for Monday?')).toBe('my booking (tour)');
    // Short words are not made singular ("plus" is not a plural).
    expect(booked('Could I book a plus one for Friday?')).toBe('my booking (plus)');
  });

  it('is the head of the subject of "is scheduled", however spaced', () => {
    expect(booked('The  oral  exam  is  scheduled for 3 June')).toBe('my booking (exam)');
  });

  it('is a booked noun named anywhere when no verb names it', () => {
    expect(booked('I need a lesson on Monday')).toBe('my booking (lesson)');
  });
});

describe('RuleExtractor: a possession named only by numbers', () => {
  it('is keyed by the last number before a second item, with punctuation dropped', () => {
    fact('I ride the 42!', 'what I ride: my 42', '42', 'have', { accumulate: true });
    fact('I ride the 42/43', 'what I ride: my 43', '42/43', 'have', { accumulate: true });
    fact('I ride the 42, the 43 on Sundays', 'what I ride: my 42', '42, the 43 on Sundays', 'have', { accumulate: true });
  });
});

describe('RuleExtractor: which clause carries context, and what a question is', () => {
  it('a later sentence that corrects carries the sentence before it; one that names its topic does not', () => {
    const [, corrected] = all('I ordered the red pot. Sorry, I meant the blue pot');
    expect(corrected).toEqual({
      key: 'the blue pot', value: 'Sorry, I meant the blue pot', text: 'Sorry, I meant the blue pot', pattern: 'correction',
      updates: { kind: 'latest' }, context: 'I ordered the red pot.',
    });
    const [, named] = all('I paid. My exam is now on May 3');
    expect(named).toEqual({
      key: 'my exam', value: 'on May 3', text: 'My exam is now on May 3', pattern: 'update-my-x-is-y', updates: { kind: 'date', expr: 'May 3' },
    });
    // A correction word glued to the text before it leaves a space in its place.
    fact('Not the blue pot—I meant the green one', 'Not the blue pot— the green one', 'Not the blue pot—I meant the green one', 'correction', { updates: { kind: 'latest' } });
  });

  it('an update whose topic phrase is a clause has no named topic', () => {
    fact('my plan when we met is now Friday', 'my plan when we met', 'my plan when we met is now Friday', 'update', { updates: { kind: 'date', expr: 'Friday' } });
  });

  it('a question is not a statement of fact unless it books something; "?!" ends no question', () => {
    plain('Is my bike ready?');
    fact('My bike is ready?!', 'my bike', 'ready', 'my-x-is-y');
    fact('My bike is ...', 'My bike is ...', 'My bike is ...', 'sentence');
  });

  it('a booking request loses only its opening "can I" and its closing punctuation', () => {
    fact('Please, can I book a service for Friday?', 'my booking (service)', 'Please, can I book a service for Friday', 'booking');
    fact('Can  I book a service for Friday?', 'my booking (service)', 'book a service for Friday', 'booking');
    fact('Can I  book a service for Friday?', 'my booking (service)', 'book a service for Friday', 'booking');
    fact('Can I book a service for 10.30 on Friday?', 'my booking (service)', 'book a service for 10.30 on Friday', 'booking');
  });

  it('questions that name a detail only as "your newest" or "second best" keep those words; spacing does not matter', () => {
    expect(one('07700 900111', "What's your newest number?")).toMatchObject({ key: 'my newest number', pattern: 'answer' });
    expect(one('07700 900222', "What's your second best number?")).toMatchObject({ key: 'my second best number', pattern: 'answer' });
    expect(one('07700 900333', "What's the best  number?")).toMatchObject({ key: 'my phone number (mobile)', pattern: 'answer' });
    expect(one('Friday?!', 'When do you want the delivery?')).toMatchObject({ key: 'my booking (delivery)', pattern: 'answer' });
  });

  it('the other side\'s own name, likings and possessions are never the topic of the reply', () => {
    plain('Dana');
    expect(one('Dana', "You can call me Ada. What's yours?").pattern).toBe('sentence');
    expect(one('Friday', 'I prefer mornings myself. Which day suits you?')).toMatchObject({ key: 'Which day suits you?', pattern: 'answer' });
    expect(one('Yes', 'I have a slot on Friday, would you like it?')).toMatchObject({ key: 'I have a slot on Friday, would you like it?', pattern: 'answer' });
  });
});

describe('RuleExtractor: edges of the topic helpers', () => {
  it('a passing modifier is dropped only at the start of a topic', () => {
    fact('My brand new bike is red', 'my brand new bike', 'red', 'my-x-is-y');
  });

  it('a clause split after a comma leaves no comma behind', () => {
    expect(splitSentences("I left,  and I'm fine")).toEqual(['I left', "I'm fine"]);
  });

  it('a possession named by a number then words is keyed by its last word, stopping only at whole stop words', () => {
    fact('I ride the 42, via Atherton', 'what I ride: my atherton', '42, via Atherton', 'have', { accumulate: true });
    // A model number is not the noun: the last word with a letter is.
    fact('I ride the 42, route 7', 'what I ride: my route', '42, route 7', 'have', { accumulate: true });
  });

  it('a question with a fact in it is not read as the fact', () => {
    plain('Did you know my bike is a Corvane?');
  });

  it('a value or cue glued to the words around it leaves a space in its place', () => {
    fact('Actually, make it (3) trays instead', ', make it ( ) trays instead', 'Actually, make it (3) trays instead', 'update', { updates: { kind: 'quantity', expr: '3' } });
    fact('Pots for me—actually—3', 'Pots for me— —', 'Pots for me—actually—3', 'update', { updates: { kind: 'quantity', expr: '3' } });
    fact('The blue pot—scratch that—the green one', 'The blue pot— —the green one', 'The blue pot—scratch that—the green one', 'correction', { updates: { kind: 'latest' } });
  });
});
