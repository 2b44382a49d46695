// Invented customer messages for the demo project, built from templates per class. All wording is
// original to this project. `{item}`, `{order}`, `{day}`, `{amount}`, `{place}`, `{device}` are
// filled from the lists below.

export const DEMO_CLASSES = ['refund', 'shipping', 'account', 'other'] as const;
export type DemoClass = (typeof DEMO_CLASSES)[number];

export const TEMPLATES: Record<DemoClass, readonly string[]> = {
  refund: [
    'I was charged twice for order {order}, please refund the duplicate.',
    "The {item} arrived broken and I'd like my money back.",
    "Can I get a refund for the {item}? It doesn't fit.",
    "I sent the {item} back on {day} but the refund hasn't shown up yet.",
    'Please cancel order {order} and refund the card I paid with.',
    'The price dropped a day after I bought the {item}; can you refund the difference?',
    'My refund for order {order} was only partial, {amount} is still missing.',
    'You billed me {amount} for a subscription I cancelled last month.',
    "The voucher didn't apply at checkout, so I paid {amount} too much.",
    "I'd like to return the {item} for a full refund, it's never been used.",
    'Still waiting on the money for the {item} I returned two weeks ago.',
    'Order {order} was cancelled by you, so why was my card charged {amount}?',
  ],
  shipping: [
    "The parcel tracking hasn't moved since {day}.",
    'Order {order} says delivered but nothing was left at my door.',
    'Can you send the {item} to my office address instead?',
    'The courier left a note but the depot is shut on {day}.',
    'How long does delivery to {place} usually take?',
    'My package went to the wrong town, the label says {place}.',
    'Is express delivery possible for order {order}?',
    'The box arrived crushed, though the {item} inside seems fine.',
    "Tracking for {order} has said 'held at the sorting hub' for a week.",
    'Could you put my two orders into one shipment?',
    'The driver rang on {day} while I was out, can I pick a new slot?',
    'Only half of order {order} came, the {item} is missing from the box.',
  ],
  account: [
    "I can't sign in, the reset link in my email has already expired.",
    'Please change the email on my account to my new address.',
    'I keep getting a verification code I never asked for.',
    'How do I close my account and remove my saved cards?',
    'My account is locked after too many sign-in attempts.',
    'The app signs me out every time I switch to {device}.',
    'I want to update the billing address saved in my profile.',
    'Two-step sign-in stopped working after I changed phones.',
    "Someone else's name shows on my account page.",
    'Can I merge my old account into the one I use now?',
    "The password page won't accept anything I type on {device}.",
    'I never received the email to confirm my new account.',
  ],
  other: [
    'Do you have the {item} in a larger size?',
    'What are your opening hours over the holidays?',
    'Just wanted to say the chat on {day} was really helpful.',
    'Is the {item} made from recycled materials?',
    'Is there a student discount?',
    'Can I buy a gift card for a friend in {place}?',
    'Your website shows a blank page on {device}.',
    'Will the {item} be back in stock soon?',
    "I'd like to suggest a dark mode for the app.",
    'Do you offer bulk pricing for schools?',
    'Are you hiring for the warehouse in {place}?',
    'Could you tell me which shop in {place} has the {item} on display?',
  ],
};

/** Second sentences that pull a message towards another class (used near the boundaries). */
export const ASIDES: Record<DemoClass, readonly string[]> = {
  refund: ["Also, I'd like my money back for it.", 'Can that charge be refunded?'],
  shipping: ["The tracking page hasn't updated either.", "It still hasn't been delivered."],
  account: ["I can't sign in to check it myself.", 'My account page shows an error too.'],
  other: ['By the way, are you open on Sundays?', 'Also, do you sell gift cards?'],
};

export const SLOTS = {
  item: [
    'rain jacket',
    'desk lamp',
    'kettle',
    'trail shoes',
    'backpack',
    'phone case',
    'blender',
    'wool scarf',
    'coffee grinder',
    'yoga mat',
    'bike light',
    'picture frame',
  ],
  day: ['Monday', 'Tuesday', 'Wednesday', 'Thursday', 'Friday', 'Saturday', 'Sunday'],
  place: ['Norbridge', 'Eastholm', 'Little Carrow', 'Westmere', 'Pellham Quay', 'Saltby'],
  device: ['my tablet', 'the desktop site', 'my new phone', 'a work laptop'],
} as const;
