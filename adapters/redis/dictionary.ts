// The preset dictionary of sealed logbook blocks (codec.ts, sealBlock): deflate finds a short
// block's common words and phrases in it, which it could not find in the block alone (a block of 20 chat
// messages compresses to about 0.94 of its records without it). Invented, generic chat English — no
// domain words and no text from a dataset; the commonest phrases come last, where deflate's distances are
// shortest. Part of the stored format: a block names the dictionary it was sealed with, so this text
// must never change; a better one is added under a new id (test/adapters/redis/codec-seal.test.ts pins it).

const TEXT_1 = `January February March April May June July August September October November December 2025 2026 2027
Monday Tuesday Wednesday Thursday Friday Saturday Sunday morning afternoon evening tonight tomorrow
yesterday today next week last week this weekend at 10 am at 2 pm o'clock half past quarter to
minutes hours days one two three four five six seven eight nine ten twenty thirty fifty hundred
price cost pounds dollars euros per month each total address phone number email name booking
appointment order reservation account payment card cash receipt refund delivery pick up drop off
open closed available location city town street near the centre. Could you tell me more about it?
How much does it cost? How long will it take? What time do you open? Where is it? Which one do you
recommend? Do you have any other options? Is it possible to change the date? Can I change my
appointment? I would like to make a booking for two people. I'd like to cancel my order, please. I
need it by Friday. I want to know if there is anything available. My name is Sam and my number is on
the form. My email address is the same as before. I live in the north of the city. I'm not sure yet,
I'll think about it. I think so. I don't think so. I don't know. I have a question about my order.
I've been waiting for a while. I was wondering if you could help me. It was great, I really liked
it. That's too expensive for me. That works for me. That sounds good. That would be great. That's
perfect, thank you! Sounds good to me. No, that's all. Yes, please. No, thanks. Yes, that's right.
No, that's not right. Okay, thanks a lot. Great, thanks for your help! Thank you so much. Thanks
again, have a nice day. Goodbye! See you soon. Hi, how are you? Hello, I need some help. Good
afternoon. Hey there. Please confirm the following details: the date is, the time is, the number of
people is. Your booking is confirmed. Your order has been placed. I have sent you a confirmation
email. Sorry, there is nothing available at that time. Sorry, I could not find that. Unfortunately
we are fully booked. I found a few options for you. There is one at, would you like that? Would you
like me to book it? Would you like to know anything else? Do you want to go ahead? Is there anything
else I can help you with? Can I help you with anything else? What else can I do for you? How can I
help you today? You're welcome! No problem at all. I'm sorry to hear that. I understand. Let me see
what I can do. Please let me know if you need anything else. I will remember that. I'll make a note
of it. I can help you with that. Of course, I can do that for you. Sure, I can help with that. Okay,
I've updated it. Yes, you can. Yes, we do. No, we don't. It is open until 6 pm. It takes about an
hour. It costs about. You can find it on our website. We are open every day except. Thank you for
waiting. Thank you for letting me know. Do you have a preference? What would you like to do? When
would you like to come in? What is your name? What is the name on the booking? Could you spell that
for me? The weather is nice today. I really like it, and I would like to do it again. I am looking
for something, and I want it to be good. Can you please tell me what you think? I'm going to try
that, thanks! What do you think? Is that okay? Okay. Yes. No. Thanks. Thank you. Sure. Great. Cool.
Perfect.`;

/** Dictionaries by the id a sealed block names (codec.ts); id 1 is the one new blocks are sealed with. */
export const SEAL_DICTIONARIES: ReadonlyMap<number, Buffer> = new Map([[1, Buffer.from(TEXT_1.replace(/\n/g, ' '), 'utf8')]]);
export const SEAL_DICTIONARY = 1;
