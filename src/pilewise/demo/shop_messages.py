"""Seeded generator of an invented demo collection: customer messages of a fictional plant shop.

The shop ("Tendrilwick Plant Post"), its customers, order numbers, discount codes, phone numbers and
e-mail addresses are all made up. E-mail addresses only use the RFC 2606 reserved domains
``example.org``, ``example.net`` and ``example.com``; phone numbers use the fictional ``555-01xx`` range.

Everything is derived from ``random.Random(seed)``: two calls with the same seed and message count
write byte-identical files.

Run ``python -m pilewise.demo.shop_messages OUTPUT_FOLDER`` to write the collection.
"""

from __future__ import annotations

import argparse
import csv
import html
import re
import textwrap
from dataclasses import dataclass, field
from datetime import date, datetime, timedelta, timezone
from email.headerregistry import Address
from email.message import EmailMessage
from email.utils import format_datetime
from pathlib import Path
from random import Random

__all__ = ["CHANNELS", "CSV_COLUMNS", "PRODUCTS", "SHOP_NAME", "THEMES", "write_demo_collection"]

SHOP_NAME = "Tendrilwick Plant Post"
SHOP_SHORT = "Tendrilwick"
SHOP_ADDRESS = "care@example.org"

THEMES: tuple[str, ...] = (
    "damaged parcel",
    "pests on arrival",
    "plant care question",
    "refund request",
    "discount code not working",
    "account and log-in trouble",
    "pot size or colour exchange",
    "wholesale enquiry",
    "delivery delay and tracking",
)
"""The nine planted themes, in a fixed order."""

NOISE_LABEL = "(noise)"
AUTO_REPLY_LABEL = "(auto-reply)"

CSV_COLUMNS: tuple[str, ...] = ("message_id", "subject", "body", "received", "product", "channel")
PRODUCTS: tuple[str, ...] = ("foliage plants", "succulents", "pots & planters", "gift boxes", "care kits")
CHANNELS: tuple[str, ...] = ("web form", "e-mail", "chat", "phone note")

FIRST_DAY = date(2026, 1, 5)
LAST_DAY = date(2026, 6, 30)
_N_DAYS = (LAST_DAY - FIRST_DAY).days + 1

# Relative theme sizes: the largest is three times the smallest.
_THEME_WEIGHTS: dict[str, int] = {
    "damaged parcel": 15,
    "pests on arrival": 11,
    "plant care question": 19,
    "refund request": 12,
    "discount code not working": 9,
    "account and log-in trouble": 8,
    "pot size or colour exchange": 9,
    "wholesale enquiry": 7,
    "delivery delay and tracking": 21,
}

# (peak day offset from FIRST_DAY, spread in days, share of messages near the peak); None = flat.
_THEME_PEAKS: dict[str, tuple[int, int, float] | None] = {
    "damaged parcel": (14, 12, 0.35),
    "pests on arrival": (140, 20, 0.45),
    "plant care question": (95, 25, 0.30),
    "refund request": None,
    "discount code not working": (68, 5, 0.45),
    "account and log-in trouble": (110, 4, 0.40),
    "pot size or colour exchange": None,
    "wholesale enquiry": None,
    "delivery delay and tracking": (38, 8, 0.35),
}

_PRODUCT_WEIGHTS: dict[str, tuple[int, int, int, int, int]] = {
    # foliage plants, succulents, pots & planters, gift boxes, care kits
    "damaged parcel": (5, 2, 5, 3, 1),
    "pests on arrival": (7, 3, 0, 2, 1),
    "plant care question": (7, 4, 1, 1, 3),
    "refund request": (4, 2, 3, 3, 2),
    "discount code not working": (3, 2, 3, 3, 2),
    "account and log-in trouble": (3, 2, 2, 2, 2),
    "pot size or colour exchange": (1, 1, 9, 1, 0),
    "wholesale enquiry": (6, 3, 2, 3, 1),
    "delivery delay and tracking": (4, 2, 2, 5, 1),
}

# Chance that a message of the theme ends on an annoyed note rather than a polite one.
_ANNOYANCE: dict[str, float] = {
    "plant care question": 0.03,
    "wholesale enquiry": 0.0,
    "pot size or colour exchange": 0.1,
    "discount code not working": 0.25,
}

_MIX_PARTNERS: dict[str, tuple[str, ...]] = {
    "damaged parcel": ("refund request", "pot size or colour exchange", "delivery delay and tracking"),
    "pests on arrival": ("refund request", "plant care question"),
    "plant care question": ("pot size or colour exchange", "pests on arrival"),
    "refund request": ("delivery delay and tracking", "account and log-in trouble"),
    "discount code not working": ("account and log-in trouble", "refund request"),
    "account and log-in trouble": ("discount code not working", "refund request"),
    "pot size or colour exchange": ("damaged parcel", "plant care question"),
    "wholesale enquiry": ("discount code not working", "plant care question"),
    "delivery delay and tracking": ("refund request", "damaged parcel"),
}


@dataclass(frozen=True)
class _ThemeText:
    subjects: tuple[str, ...]
    openings: tuple[str, ...]
    sentences: tuple[str, ...]


_TEXT: dict[str, _ThemeText] = {
    "damaged parcel": _ThemeText(
        subjects=(
            "Broken pot",
            "Damaged delivery",
            "Order {order} arrived damaged",
            "Parcel crushed",
            "pot smashed in the box",
            "Damaged {plant}",
            "Problem with my delivery",
        ),
        openings=(
            "My order {order} arrived this morning and the box was completely crushed.",
            "I'm writing because the parcel for order {order} turned up damaged.",
            "Opened my delivery today and the {colour} pot was in pieces.",
            "Not a great start to the week: the {plant} I ordered arrived with a broken pot.",
            "The courier left the box on my doorstep and it looked like it had been dropped from a height.",
            "Just received order {order}, unfortunately something went wrong in transit.",
        ),
        sentences=(
            "The pot had cracked right down the middle and there was soil all over the inside of the box.",
            "Two of the leaves on the {plant} are snapped and one stem is bent at the base.",
            "I've taken photos of the box and the pot, let me know where to send them.",
            "The outer box was fine but the plant had tipped over inside, so I think the packing shifted.",
            "There was no padding around the ceramic pot at all, just a bit of crumpled paper.",
            "The {plant2} in the same parcel survived, it's only the {plant} that got hurt.",
            "The saucer was chipped on one side and the glaze is cracked.",
            "Half the soil fell out and the roots were exposed when I opened it.",
            "The box was wet on one corner and the cardboard had gone soft.",
            "I don't mind keeping the plant if it recovers, but the pot is unusable.",
            "Could you send a replacement pot, or should I return the whole thing?",
            "This is the second time a parcel from you has arrived like this, which is disappointing.",
            "The label said fragile but clearly nobody took any notice.",
            "I'd really like this sorted before the weekend because it was meant to be a present.",
        ),
    ),
    "pests on arrival": _ThemeText(
        subjects=(
            "Bugs in my new plant",
            "{pest} on delivery",
            "Pests!",
            "Insects in the soil",
            "Problem with {plant} - pests",
            "Infested plant from order {order}",
        ),
        openings=(
            "I think the {plant} I received last {weekday} came with {pest}.",
            "Bit of a problem with my latest order ({order}): there are {pest} on it.",
            "Within a few days of the delivery I noticed {pest} on my new {plant}.",
            "Can you tell me what to do about {pest}? They arrived with the plant.",
            "The {plant} from order {order} seems to have brought some unwanted guests.",
        ),
        sentences=(
            "{pest_detail}",
            "{pest_detail}",
            "I've moved it away from my other plants so nothing spreads.",
            "I've already wiped the leaves with soapy water but they keep coming back.",
            "My other plants were perfectly healthy before this one arrived.",
            "I'm worried the {plant2} next to it is now affected too.",
            "Is the compost you use sterilised? It all seems to start in the soil.",
            "Should I repot it into fresh soil or treat it where it is?",
            "I'd prefer a replacement plant rather than spraying chemicals in my flat.",
            "A few leaves are already turning yellow and sticky.",
            "Do you check your plants for pests before they are shipped?",
            "I've put it in the bathroom on its own for now, like a little quarantine.",
            "Honestly a bit grossed out, I wasn't expecting to find anything crawling.",
        ),
    ),
    "plant care question": _ThemeText(
        subjects=(
            "Care question",
            "Help with my {plant}",
            "Yellow leaves",
            "Watering question",
            "Repotting advice?",
            "Is my {plant} ok?",
            "Question about light",
        ),
        openings=(
            "I have a quick question about my {plant}.",
            "Hoping you can help with a care question.",
            "I bought a {plant} from you in {month} and I'm not sure I'm looking after it properly.",
            "I'm new to houseplants and could use some advice.",
            "What's the best way to look after a {plant} over the summer?",
            "My {plant} is looking a bit sad and I'd love some tips.",
        ),
        sentences=(
            "How often should I water it? The card says once a week but the soil still feels wet.",
            "Some of the lower leaves are turning yellow and dropping off.",
            "The tips of the leaves have gone brown and crispy.",
            "It's on a north-facing windowsill, is that enough light?",
            "Should I repot it now or wait until it gets bigger?",
            "Roots are starting to come out of the drainage holes.",
            "The leaves are curling inwards, is it too dry?",
            "I've been misting it every morning, is that a good idea?",
            "It's leaning heavily towards the window, should I rotate it?",
            "What size pot should I move it into, the {size2} one or something larger?",
            "Do I need to feed it, and if so how often?",
            "We're going away for {days} days, will it survive without water?",
            "The new leaf came out small and pale compared to the others.",
            "Would it be happy in a bathroom with no window?",
            "Is it safe to keep near a cat? Ours likes to chew on everything.",
        ),
    ),
    "refund request": _ThemeText(
        subjects=(
            "Refund",
            "Refund request - order {order}",
            "Requesting a refund",
            "Where is my refund?",
            "Money back please",
            "Charged twice",
        ),
        openings=(
            "I would like to request a refund for order {order}.",
            "Please refund me for the {plant} I ordered.",
            "I'd like my money back for order {order}, please.",
            "I'm asking for a full refund.",
            "Following my earlier message, I'm still waiting on a refund.",
        ),
        sentences=(
            "The plant died within two weeks despite following the care instructions.",
            "I cancelled the order within an hour of placing it but was still charged.",
            "I was charged twice for the same order, both payments are showing on my card.",
            "It has been {days} days since you said the refund was processed and nothing has arrived.",
            "I returned the parcel on {weekday} and have the receipt from the drop-off point.",
            "The plant looks nothing like the photo on the website, it's about half the size.",
            "I'd rather not have a voucher, I'd like the money back to my card.",
            "Can you confirm how long refunds usually take to show up?",
            "I've attached my bank statement showing the payment.",
            "A partial refund would also be fine if that's easier.",
            "Your returns page says 30 days and I'm well within that.",
            "Nobody has replied to my last two e-mails, so I'm trying again here.",
            "If I don't hear back I'll have to raise it with my bank.",
        ),
    ),
    "discount code not working": _ThemeText(
        subjects=(
            "Discount code not working",
            "Code {code} invalid?",
            "Promo code problem",
            "Voucher won't apply",
            "{code}",
            "Checkout discount issue",
        ),
        openings=(
            "The discount code {code} isn't working at checkout.",
            "I tried to use {code} but the website says it's invalid.",
            "Your newsletter gave me the code {code} but it won't apply.",
            "Quick one, is {code} still valid?",
            "I keep getting an error when I enter my discount code.",
        ),
        sentences=(
            "It says the code cannot be applied to the items in my basket.",
            "The basket total is over the minimum spend so I don't see why it's rejected.",
            "It worked for a second and then the price jumped back up.",
            "I've tried typing it in capitals and in lower case, same result.",
            "The e-mail says it's valid until the end of the month.",
            "I ended up placing the order without it, can you apply it retrospectively?",
            "Does the code exclude sale items? The newsletter didn't say.",
            "My friend used the same code yesterday without any problem.",
            "I got the code for signing up to the newsletter but it has said already used from day one.",
            "Can you just take the {percent}% off manually?",
            "The checkout also added a delivery charge I wasn't expecting.",
            "It's a bit frustrating because that's the only reason I came back to order.",
            "It was order {order}, in case you can refund the difference.",
        ),
    ),
    "account and log-in trouble": _ThemeText(
        subjects=(
            "Can't log in",
            "Password reset not working",
            "Account locked",
            "Login problem",
            "Problem with my account",
            "reset link expired",
        ),
        openings=(
            "I can't log in to my account.",
            "The password reset e-mail never arrives.",
            "I've been having trouble with my account since {weekday}.",
            "Your website keeps logging me out.",
            "I've been locked out of my account.",
        ),
        sentences=(
            "I've requested a reset link three times and checked my spam folder.",
            "When I click the link it says it has expired, even though I click it straight away.",
            "It tells me there's no account with my e-mail address, but I've ordered from you before.",
            "I think I may have signed up with my old work address.",
            "After logging in it sends me straight back to the login page.",
            "My order history has disappeared from the account page.",
            "I'd like to change the e-mail address on my account but can't find where.",
            "The page just shows a spinning wheel after I enter my password.",
            "I'm using my phone, I haven't tried a computer yet.",
            "Can you delete the old account and merge the orders into this one?",
            "I need to get in to download the invoice for order {order}.",
            "It says my account is locked after too many attempts.",
            "Please don't make me set up another account, I already have two.",
        ),
    ),
    "pot size or colour exchange": _ThemeText(
        subjects=(
            "Exchange pot",
            "Wrong size pot",
            "Swap colour?",
            "Exchange request - order {order}",
            "Different pot please",
            "{size} pot too small",
        ),
        openings=(
            "Would it be possible to swap the pot on my order?",
            "I ordered the {colour} pot but I'd like to exchange it for the {colour2} one.",
            "The {size} pot is too small for my {plant}, can I exchange it for the {size2}?",
            "Can I exchange a pot I bought last week?",
            "I've realised I picked the wrong size pot.",
        ),
        sentences=(
            "It's unused and still in the original box.",
            "The colour looks quite different in real life compared to the photos.",
            "I measured the root ball and it really needs something a few centimetres wider.",
            "The {colour} clashes with everything in my living room.",
            "Happy to pay the difference if the bigger one costs more.",
            "Do I need to send the old one back first or can you post both at the same time?",
            "The {size2} size is showing as out of stock, do you know when it'll be back?",
            "Is there a returns label I can print, or do I arrange postage myself?",
            "I'd also like a matching saucer if you have one.",
            "It doesn't have a drainage hole, which I didn't notice when ordering.",
            "The {colour2} one would match the planter I already have from you.",
            "This is about order {order}.",
            "I'm not in a hurry, whenever suits is fine.",
        ),
    ),
    "wholesale enquiry": _ThemeText(
        subjects=(
            "Wholesale enquiry",
            "Bulk order",
            "Trade account?",
            "Plants for {business_short}",
            "Large order question",
            "Corporate order",
        ),
        openings=(
            "I run {business} and we're looking for a regular supplier of plants.",
            "Do you offer trade or bulk pricing?",
            "We're fitting out {business} and would like around {qty} plants.",
            "I'm enquiring about a larger order for {business}.",
            "Hello, I manage {business} and we'd like to brighten the place up a bit.",
        ),
        sentences=(
            "We'd need mostly low-light plants, something like {plant} or {plant2}.",
            "Could you send a price list for orders over {qty} units?",
            "Ideally the pots would all be the same colour, {colour} if possible.",
            "Do you deliver on a pallet, or would it be lots of separate boxes?",
            "We'd also be interested in a monthly care visit if that's something you offer.",
            "Is there a minimum order quantity for trade accounts?",
            "We would need an invoice with our company details rather than a card payment.",
            "Our opening is planned for {month}, so timing matters.",
            "We had plants from another supplier and half of them died, so we'd like hardier ones.",
            "Do you offer any kind of replacement guarantee on larger orders?",
            "Could we have a quick call to talk it through?",
            "We'd want to start small with a trial order and scale up.",
            "A few hanging plants for the windows would be great too.",
        ),
    ),
    "delivery delay and tracking": _ThemeText(
        subjects=(
            "Where is my order?",
            "Delivery delay",
            "Order {order} not arrived",
            "Tracking not updating",
            "Late delivery",
            "Still waiting",
            "parcel??",
        ),
        openings=(
            "Where is my order? I placed it {days} days ago.",
            "My order {order} still hasn't arrived.",
            "The tracking for order {order} hasn't updated since {weekday}.",
            "Can you give me an update on my delivery?",
            "I was told my parcel would come on {weekday} but nothing turned up.",
            "Still waiting for order {order}.",
        ),
        sentences=(
            "The tracking page just says label created and nothing else.",
            "I stayed in all day and nobody came to the door.",
            "The courier says it was delivered but it definitely wasn't, I've checked with the neighbours.",
            "I'm worried about the plant sitting in a box in a warehouse for this long.",
            "It was supposed to be a birthday present and the birthday has now passed.",
            "The tracking number you sent ({tracking}) doesn't work on the courier's website.",
            "I paid for next-day delivery, so this is a bit much.",
            "Can you check whether it was sent to my old address by mistake?",
            "It has said out for delivery three days in a row.",
            "If it's lost, please just send another one or cancel the order.",
            "I got a card saying they tried to deliver but I was home the whole time.",
            "Any idea when it will actually be dispatched?",
            "The confirmation e-mail said 2-3 working days and it's been well over a week.",
        ),
    ),
}

_PEST_DETAILS: dict[str, tuple[str, ...]] = {
    "fungus gnats": (
        "There are tiny black flies buzzing around the pot every time I water it.",
        "Little flies keep crawling out of the top of the soil.",
        "I put a yellow sticky trap next to it and it was covered overnight.",
    ),
    "mealybugs": (
        "I found little white cottony patches where the leaves meet the stem.",
        "There are small white fluffy bits in the joints that smear when I touch them.",
        "The white fuzzy things are spreading to the new growth.",
    ),
    "spider mites": (
        "The underside of the leaves has fine webbing and pale speckles.",
        "I checked with a magnifying glass and there are definitely mites on it.",
        "The leaves look dusty and dotted, and there are tiny webs between them.",
    ),
    "thrips": (
        "There are silvery streaks on the leaves and tiny dark specks underneath.",
        "I saw little thin insects running along the leaves when I turned them over.",
    ),
}

_PLANTS_FOLIAGE: tuple[str, ...] = (
    "monstera",
    "pothos",
    "calathea",
    "snake plant",
    "fiddle leaf fig",
    "ZZ plant",
    "peace lily",
    "rubber plant",
    "philodendron",
    "bird of paradise",
    "maidenhair fern",
    "alocasia",
    "spider plant",
    "hoya",
    "parlour palm",
    "Chinese money plant",
)
_PLANTS_SUCCULENT: tuple[str, ...] = (
    "echeveria",
    "jade plant",
    "haworthia",
    "aloe",
    "string of pearls",
    "cactus",
    "panda plant",
)
_POT_COLOURS: tuple[str, ...] = (
    "terracotta",
    "sage green",
    "matte black",
    "speckled white",
    "ochre",
    "dusty pink",
    "slate blue",
    "cream",
)
_POT_SIZES: tuple[str, ...] = ("9 cm", "12 cm", "14 cm", "17 cm", "21 cm", "24 cm")
_WEEKDAYS: tuple[str, ...] = ("Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday")
_MONTHS: tuple[str, ...] = ("January", "February", "March", "April", "May", "June", "July", "September")
_CODES: tuple[tuple[str, int], ...] = (
    ("SPRING", 15),
    ("WELCOME", 10),
    ("LEAFY", 20),
    ("REPOT", 12),
    ("GREENUP", 5),
    ("POTLUCK", 10),
    ("FRIENDS", 25),
)
_BUSINESSES: tuple[tuple[str, str], ...] = (
    ("a small café", "our café"),
    ("a co-working space", "our co-working space"),
    ("a dental practice", "the practice"),
    ("an office of about 40 people", "our office"),
    ("a yoga studio", "the studio"),
    ("a hair salon", "the salon"),
    ("a little bakery", "the bakery"),
    ("a guest house with twelve rooms", "the guest house"),
    ("an architecture office", "our office"),
)
_DAY_WORDS: dict[int, str] = {5: "five", 6: "six", 7: "seven", 8: "eight", 9: "nine", 10: "ten", 12: "twelve"}

_FIRST_NAMES: tuple[str, ...] = (
    "Maren", "Tobin", "Isla", "Oren", "Priya", "Jonas", "Elif", "Rafe", "Noor", "Carys",
    "Dario", "Hanne", "Idris", "Lotte", "Mateo", "Saskia", "Teo", "Ula", "Wren", "Yusra",
    "Ansel", "Bea", "Cormac", "Dilys", "Emre", "Fenna", "Gideon", "Hollis", "Ines", "Jarek",
    "Kasia", "Linnea", "Magnus", "Nell", "Otis", "Petra", "Quinn", "Rosalind", "Soren", "Tamsin",
)  # fmt: skip
_INITIALS = "ABCDEFGHJKLMNPRSTVW"
_STAFF: tuple[str, ...] = ("Juniper", "Alder", "Rowan", "Hazel")

_GREETINGS: tuple[str, ...] = (
    "Hi,",
    "Hello,",
    "Hi there,",
    f"Dear {SHOP_SHORT} team,",
    "Good morning,",
    f"Hello {SHOP_SHORT},",
    "To whom it may concern,",
    "Hey,",
    "Hi team,",
    "Good afternoon,",
)
_POLITE_CLOSINGS: tuple[str, ...] = (
    "Thanks in advance.",
    "Many thanks for your help.",
    "Looking forward to hearing from you.",
    "Thank you!",
    "Appreciate any help.",
    "Thanks so much.",
    "Hope to hear from you soon.",
)
_ANNOYED_CLOSINGS: tuple[str, ...] = (
    "Please sort this out as soon as possible.",
    "I expect a reply this time.",
    "Really not impressed.",
    "Please get back to me today.",
    "This is not good enough.",
    "Very disappointed, to be honest.",
)
_SIGN_OFFS: tuple[str, ...] = (
    "Best,\n{name}",
    "Kind regards,\n{name}",
    "Thanks,\n{name}",
    "{name}",
    "Cheers, {first}",
    "- {first}",
    "Regards\n{name}",
    "Best wishes,\n{first}",
)
_CONTEXT_SENTENCES: tuple[str, ...] = (
    "I've ordered from you a few times before and have always been happy.",
    "I've been a customer for a while now.",
    "Sorry for the long message.",
    "This was my first order with you.",
    "A friend recommended your shop.",
    "Sorry if this is the wrong place to ask.",
)
_MIX_CONNECTORS: tuple[str, ...] = (
    "Also, one more thing:",
    "P.S.",
    "Separately:",
    "While I have you -",
    "And another thing:",
    "Unrelated, but",
)
_PII_SENTENCES: tuple[str, ...] = (
    "You can call me on {phone} if that's easier.",
    "My number is {phone}.",
    "Please reply to {alt_email} instead, I don't check this inbox often.",
    "My partner's address is {alt_email} in case I miss your reply.",
    "Best number to reach me: {phone} (evenings).",
    "Feel free to text me at {phone}.",
)
_PHONE_HEADERS: tuple[str, ...] = (
    "Call from {name} re order {order}.",
    "Rang at {clock}, {name}:",
    "Voicemail from {name}, transcribed:",
    "Phone call from {name}:",
    "Customer ({name}) called, notes:",
)
_PHONE_ACTIONS: tuple[str, ...] = (
    "call back tomorrow",
    "e-mail sent",
    "logged, no action",
    "follow up Monday",
    "passed to the team",
    "waiting for photos",
)
_NOISE: tuple[tuple[str, str], ...] = (
    ("", "hello?"),
    ("", "see attached"),
    ("test", "test"),
    ("(no subject)", "??"),
    ("", "Any update"),
    ("Re:", "ok thanks"),
    ("", "Sent from my phone"),
    ("hi", "hi"),
    ("", "call me back pls"),
    ("Fwd:", "."),
    ("", "thank you!!"),
    ("question", "nvm sorted it"),
)
_GENERIC_SUBJECTS: tuple[str, ...] = (
    "Question",
    "Order {order}",
    "Help please",
    "Re: your order {order}",
    "Quick question",
    "Your order {order}",
    "",
)
_AUTO_SUBJECTS: tuple[str, ...] = (
    "Automatic reply: Your {shop} order {order}",
    "Out of Office: Re: order {order}",
    "Auto: Your order has shipped",
    "Automatic reply: Re: your message",
    "Out of office",
)
_AUTO_BODIES: tuple[str, ...] = (
    "Thank you for contacting me. I am out of office until {back} with limited access to e-mail. "
    "For urgent matters please contact {colleague}.",
    "Thank you for your e-mail. I am out of the office until {back} and will reply when I return. "
    "For urgent matters please contact {colleague}.",
    "Thank you for contacting me. I'm currently out of office until {back} with no access to e-mail. "
    "Your message will not be forwarded.",
    "Thanks for your message. I am out of office until {back}. If it is urgent, please contact {colleague}.",
    "Thank you for contacting me, I am out of the office until {back} with limited access to e-mail.",
)
_SHOP_REPLIES: tuple[str, ...] = (
    "Thanks for getting in touch. Could you send us your order number and a photo or two?",
    "Thank you for your message. We have passed this on to the team and will be in touch shortly.",
    "Sorry to hear about this! Could you tell us a little more so we can help?",
    "Thanks for your patience. We are looking into it and will update you within two working days.",
)
_SIGNATURES: tuple[str, ...] = (
    "{name}\nSent from my phone",
    "{name}\nHouseplant enthusiast, slowly running out of windowsills",
    "{first}\n{phone}",
    "{name}",
    "{first} {initial}.\nPlease consider the environment before printing this e-mail",
)

_ALT_DOMAINS: tuple[str, ...] = ("example.net", "example.com", "example.org")


@dataclass
class _Customer:
    first: str
    initial: str
    email: str

    @property
    def name(self) -> str:
        return f"{self.first} {self.initial}."


@dataclass
class _Message:
    kind: str  # "theme", "noise" or "auto"
    theme: str | None
    day: date
    second: str | None = None
    message_id: str = ""
    source: str = "csv"  # "csv", "eml" or "html"
    channel: str = ""
    product: str = ""
    typos: bool = False
    pii: bool = False
    subject: str = ""
    body: str = ""
    customer: _Customer | None = None
    ctx: dict[str, str] = field(default_factory=dict)


def write_demo_collection(folder: Path, *, seed: int = 7, n_messages: int = 1500) -> Path:
    """Write the demo collection into `folder` (created if missing) and return the folder.

    The collection holds `n_messages` invented customer messages of a fictional houseplant shop,
    spread over 2026-01-05 .. 2026-06-30 and built around the nine :data:`THEMES`:

    - ``folder/messages.csv`` with columns ``message_id,subject,body,received,product,channel``
      (about 98% of the messages);
    - ``folder/mailbox/M-xxxxx.eml``: up to 20 RFC 5322 e-mails, some with a quoted reply block
      and a ``-- `` signature, two of them multipart with an HTML alternative;
    - ``folder/web/M-xxxxx.html``: up to 10 contact-form pages with a nav menu, script and style.

    The answer key (planted theme of every message) is written *outside* the collection, next to
    it, as ``folder.parent / (folder.name + "-planted_themes.csv")`` with columns
    ``source,message_id,theme``, so that running the tool on `folder` does not ingest it. The theme
    is one of :data:`THEMES`, ``"<theme> + <theme>"`` for a message mixing two themes,
    ``"(noise)"`` for very short messages or ``"(auto-reply)"`` for out-of-office replies. It is
    meant for showing the demo only, not for correctness tests.

    Files previously written by this function (``messages.csv``, ``mailbox/M-*.eml``,
    ``web/M-*.html``) are replaced; other files in `folder` are left alone.

    Parameters
    ----------
    folder : Path
        Output folder; created with its parents if missing.
    seed : int, optional
        Seed of the single ``random.Random`` all content derives from, by default 7.
    n_messages : int, optional
        Total number of messages across the CSV, e-mail and HTML files, by default 1500.

    Returns
    -------
    Path
        `folder`, as given.

    Raises
    ------
    ValueError
        If `n_messages` is negative.
    """
    if n_messages < 0:
        raise ValueError(f"n_messages must be >= 0, got {n_messages}")
    folder = Path(folder)
    rng = Random(seed)
    messages = _plan(rng, n_messages)
    for message in messages:
        _render(rng, message)

    folder.mkdir(parents=True, exist_ok=True)
    mailbox = folder / "mailbox"
    web = folder / "web"
    for sub, pattern in ((mailbox, "M-*.eml"), (web, "M-*.html")):
        if sub.is_dir():
            for old in sorted(sub.glob(pattern)):
                old.unlink()
    if any(m.source == "eml" for m in messages):
        mailbox.mkdir(exist_ok=True)
    if any(m.source == "html" for m in messages):
        web.mkdir(exist_ok=True)

    with (folder / "messages.csv").open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(CSV_COLUMNS)
        for m in messages:
            if m.source == "csv":
                writer.writerow((m.message_id, m.subject, m.body, m.day.isoformat(), m.product, m.channel))

    eml_messages = [m for m in messages if m.source == "eml"]
    multipart_ids = {m.message_id for m in _pick(rng, [m for m in eml_messages if m.kind == "theme"], 2)}
    for m in eml_messages:
        raw = _build_email(rng, m, multipart=m.message_id in multipart_ids)
        (mailbox / f"{m.message_id}.eml").write_bytes(raw)
    for m in messages:
        if m.source == "html":
            (web / f"{m.message_id}.html").write_text(_build_html(m), encoding="utf-8", newline="\n")

    resolved = folder.resolve()
    key_path = resolved.parent / f"{resolved.name}-planted_themes.csv"
    with key_path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(("source", "message_id", "theme"))
        for m in messages:
            source = {"csv": "messages.csv", "eml": f"mailbox/{m.message_id}.eml"}.get(
                m.source, f"web/{m.message_id}.html"
            )
            writer.writerow((source, m.message_id, _label(m)))
    return folder


def _label(m: _Message) -> str:
    if m.kind == "noise":
        return NOISE_LABEL
    if m.kind == "auto":
        return AUTO_REPLY_LABEL
    assert m.theme is not None
    return f"{m.theme} + {m.second}" if m.second else m.theme


def _pick(rng: Random, items: list[_Message], k: int) -> list[_Message]:
    """`k` items (or all of them) chosen at random, kept in their original order."""
    k = min(k, len(items))
    chosen = sorted(rng.sample(range(len(items)), k))
    return [items[i] for i in chosen]


def _allocate(total: int, weights: dict[str, int]) -> dict[str, int]:
    """Split `total` in proportion to `weights` (largest remainder, ties in key order)."""
    weight_sum = sum(weights.values())
    exact = {k: total * w / weight_sum for k, w in weights.items()}
    counts = {k: int(v) for k, v in exact.items()}
    rest = total - sum(counts.values())
    by_remainder = sorted(weights, key=lambda k: (-(exact[k] - counts[k]), THEMES.index(k)))
    for k in by_remainder[:rest]:
        counts[k] += 1
    return counts


def _sample_day(rng: Random, theme: str | None) -> date:
    peak = _THEME_PEAKS.get(theme) if theme else None
    if peak is not None and rng.random() < peak[2]:
        offset = round(rng.gauss(peak[0], peak[1]))
        offset = min(max(offset, 0), _N_DAYS - 1)
    else:
        offset = rng.randrange(_N_DAYS)
    return FIRST_DAY + timedelta(days=offset)


def _plan(rng: Random, n: int) -> list[_Message]:
    """Decide kind, theme, day, id, file, channel, product and decorations of every message."""
    n_noise = round(n * 0.02)
    n_auto = round(n * 0.03)
    n_themed = max(n - n_noise - n_auto, 0)
    counts = _allocate(n_themed, _THEME_WEIGHTS)

    planned: list[_Message] = []
    for theme in THEMES:
        planned.extend(_Message("theme", theme, _sample_day(rng, theme)) for _ in range(counts[theme]))
    planned.extend(_Message("noise", None, _sample_day(rng, None)) for _ in range(n_noise))
    planned.extend(_Message("auto", None, _sample_day(rng, None)) for _ in range(n_auto))
    planned = planned[:n]
    rng.shuffle(planned)
    planned.sort(key=lambda m: m.day)  # stable: ties keep their shuffled order
    for i, m in enumerate(planned, start=1):
        m.message_id = f"M-{i:05d}"

    themed = [m for m in planned if m.kind == "theme"]
    for m in _pick(rng, themed, round(n * 0.10)):
        partners = _MIX_PARTNERS[m.theme or ""]
        if rng.random() < 0.6:
            m.second = rng.choice(partners)
        else:
            m.second = rng.choice([t for t in THEMES if t != m.theme])
    for m in _pick(rng, themed, round(n * 0.08)):
        m.typos = True
    for m in _pick(rng, themed, round(n * 0.05)):
        m.pii = True

    n_eml = min(20, n // 75)
    n_html = min(10, n // 150)
    eml_pool = [m for m in planned if m.kind != "noise"]
    for m in _pick(rng, eml_pool, n_eml):
        m.source = "eml"
    html_pool = [m for m in themed if m.source == "csv"]
    for m in _pick(rng, html_pool, n_html):
        m.source = "html"

    for m in planned:
        if m.source == "eml" or m.kind == "auto":
            m.channel = "e-mail"
        elif m.source == "html":
            m.channel = "web form"
        else:
            m.channel = rng.choices(CHANNELS, weights=(40, 30, 20, 10))[0]
        weights = _PRODUCT_WEIGHTS.get(m.theme or "", (1, 1, 1, 1, 1))
        m.product = rng.choices(PRODUCTS, weights=weights)[0]
    return planned


def _new_customer(rng: Random) -> _Customer:
    first = rng.choice(_FIRST_NAMES)
    initial = rng.choice(_INITIALS)
    style = rng.randrange(4)
    if style == 0:
        local = f"{first.lower()}.{initial.lower()}"
    elif style == 1:
        local = f"{first[0].lower()}{initial.lower()}{rng.randrange(10, 99)}"
    elif style == 2:
        local = f"{first.lower()}_{rng.choice(('plants', 'green', 'leaf', 'home'))}"
    else:
        local = f"{first.lower()}{initial.lower()}"
    return _Customer(first, initial, f"{local}@{rng.choice(('example.net', 'example.org', 'example.com'))}")


def _context(rng: Random, m: _Message, customer: _Customer) -> dict[str, str]:
    if m.product == "succulents":
        plants = list(_PLANTS_SUCCULENT)
    elif m.product == "foliage plants":
        plants = list(_PLANTS_FOLIAGE)
    else:
        plants = list(_PLANTS_FOLIAGE + _PLANTS_SUCCULENT)
    plant, plant2 = rng.sample(plants, 2)
    colour, colour2 = rng.sample(_POT_COLOURS, 2)
    size_i = rng.randrange(len(_POT_SIZES) - 1)
    number = rng.randrange(10000, 99999)
    order = rng.choice((f"TW-{number}", f"#{number}", f"no. {number}", f"TW{number}"))
    days_n = rng.choice((5, 6, 7, 8, 9, 10, 12, 14, 16))
    days = _DAY_WORDS[days_n] if days_n in _DAY_WORDS and rng.random() < 0.3 else str(days_n)
    code_word, percent = rng.choice(_CODES)
    pest = rng.choice(sorted(_PEST_DETAILS))
    business, business_short = rng.choice(_BUSINESSES)
    alt_local = f"{customer.first.lower()}.{customer.initial.lower()}{rng.randrange(10, 99)}"
    return {
        "plant": plant,
        "plant2": plant2,
        "colour": colour,
        "colour2": colour2,
        "size": _POT_SIZES[size_i],
        "size2": _POT_SIZES[size_i + 1],
        "order": order,
        "days": days,
        "weekday": rng.choice(_WEEKDAYS),
        "month": rng.choice(_MONTHS),
        "code": f"{code_word}{percent}",
        "percent": str(percent),
        "pest": pest,
        "pest_detail": rng.choice(_PEST_DETAILS[pest]),
        "business": business,
        "business_short": business_short,
        "qty": str(rng.choice((20, 25, 30, 40, 50, 60, 80, 100))),
        "tracking": f"TWP{rng.randrange(10**9, 10**10)}",
        "phone": f"555-01{rng.randrange(100):02d}",
        "alt_email": f"{alt_local}@{rng.choice(_ALT_DOMAINS)}",
        "clock": f"{rng.randrange(9, 18)}:{rng.choice(('00', '10', '15', '30', '45', '50'))}",
        "name": customer.name,
        "first": customer.first,
        "initial": customer.initial,
        "shop": SHOP_SHORT,
    }


def _fill(template: str, ctx: dict[str, str]) -> str:
    text = template.format(**ctx)
    return text[:1].upper() + text[1:] if text else text


def _render(rng: Random, m: _Message) -> None:
    """Write subject and body of `m` (the body without e-mail quote or signature)."""
    customer = _new_customer(rng)
    m.customer = customer
    ctx = _context(rng, m, customer)
    m.ctx = ctx
    if m.kind == "noise":
        m.subject, m.body = rng.choice(_NOISE)
        return
    if m.kind == "auto":
        _render_auto(rng, m, ctx)
        return
    assert m.theme is not None
    text = _TEXT[m.theme]
    if rng.random() < 0.72:
        m.subject = _fill(rng.choice(text.subjects), ctx)
    else:
        m.subject = rng.choice(_GENERIC_SUBJECTS).format(**ctx)
    if rng.random() < 0.1 and m.subject:
        m.subject = m.subject.lower()
    if m.channel == "chat" and rng.random() < 0.8:
        m.subject = ""

    sentences = [_fill(rng.choice(text.openings), ctx)]
    short = m.channel == "chat"
    n_body = rng.choice((1, 1, 2)) if short else rng.choice((2, 2, 3, 3, 4))
    sentences += [_fill(s, ctx) for s in rng.sample(text.sentences, n_body)]
    if not short and rng.random() < 0.12:
        sentences.insert(rng.randrange(1, len(sentences) + 1), rng.choice(_CONTEXT_SENTENCES))
    if len(sentences) >= 4 and rng.random() < 0.5:
        cut = rng.randrange(2, len(sentences))
        paragraphs = [" ".join(sentences[:cut]), " ".join(sentences[cut:])]
    else:
        paragraphs = [" ".join(sentences)]
    if m.second:
        other = _TEXT[m.second]
        extra = [_fill(rng.choice(other.openings), ctx)]
        if rng.random() < 0.6:
            extra.append(_fill(rng.choice(other.sentences), ctx))
        paragraphs.append(f"{rng.choice(_MIX_CONNECTORS)} {' '.join(extra)}")
    if m.pii:
        paragraphs[-1] += " " + _fill(rng.choice(_PII_SENTENCES), ctx)
    if m.typos:
        paragraphs = _add_typos(rng, paragraphs)

    annoyed = rng.random() < _ANNOYANCE.get(m.theme, 0.3)
    closing = rng.choice(_ANNOYED_CLOSINGS if annoyed else _POLITE_CLOSINGS)
    if m.channel == "chat":
        body = " ".join(paragraphs)
        if rng.random() < 0.35:
            body = body.lower()
    elif m.channel == "phone note":
        header = _fill(rng.choice(_PHONE_HEADERS), ctx)
        body = f"{header}\n{' '.join(paragraphs)}\nAction: {rng.choice(_PHONE_ACTIONS)}"
    else:
        parts: list[str] = []
        greet = m.channel == "e-mail" or rng.random() < 0.5
        if greet and rng.random() < 0.85:
            parts.append(rng.choice(_GREETINGS))
        parts.extend(paragraphs)
        if rng.random() < 0.7:
            parts.append(closing)
        if m.channel == "e-mail" or rng.random() < 0.6:
            parts.append(rng.choice(_SIGN_OFFS).format(**ctx))
        sep = "\n\n" if rng.random() < 0.7 else "\n"
        body = sep.join(parts)
    m.body = body


def _render_auto(rng: Random, m: _Message, ctx: dict[str, str]) -> None:
    back = m.day + timedelta(days=rng.randrange(3, 15))
    style = rng.randrange(3)
    if style == 0:
        back_text = f"{back.day} {back.strftime('%B')}"
    elif style == 1:
        back_text = f"{back.strftime('%A')} {back.day} {back.strftime('%B')}"
    else:
        back_text = f"{back.day:02d}/{back.month:02d}"
    colleague = f"{rng.choice(('office', 'team', 'info', 'reception'))}@{rng.choice(_ALT_DOMAINS)}"
    m.subject = rng.choice(_AUTO_SUBJECTS).format(**ctx)
    body = rng.choice(_AUTO_BODIES).format(back=back_text, colleague=colleague)
    if rng.random() < 0.5:
        body += f"\n\nKind regards,\n{ctx['name']}"
    m.body = body


_WORD = re.compile(r"\S+")


def _add_typos(rng: Random, paragraphs: list[str]) -> list[str]:
    """Swap or drop a character in 1-2 plain alphabetic words (never in addresses or numbers)."""
    text = "\n\n".join(paragraphs)
    spans: list[tuple[int, int]] = []
    for match in _WORD.finditer(text):
        token = match.group()
        core = token.strip(".,!?:;()'")
        if len(core) >= 4 and core.isalpha() and core.isascii():
            start = match.start() + token.index(core)
            spans.append((start, start + len(core)))
    if not spans:
        return paragraphs
    chosen = sorted(rng.sample(spans, min(len(spans), rng.choice((1, 1, 2)))), reverse=True)
    for start, end in chosen:
        word = text[start:end]
        i = rng.randrange(1, len(word) - 1)
        if rng.random() < 0.6 and word[i] != word[i + 1]:
            typo = word[:i] + word[i + 1] + word[i] + word[i + 2 :]
        else:
            typo = word[:i] + word[i + 1 :]
        text = text[:start] + typo + text[end:]
    return text.split("\n\n")


def _wrap(text: str) -> str:
    """Wrap every line of `text` at 72 characters, as a mail client would."""
    lines: list[str] = []
    for line in text.split("\n"):
        lines.extend(textwrap.wrap(line, width=72, break_long_words=False, break_on_hyphens=False) or [""])
    return "\n".join(lines)


def _build_email(rng: Random, m: _Message, *, multipart: bool) -> bytes:
    assert m.customer is not None
    ctx = m.ctx
    customer = m.customer
    local = customer.email.split("@", 1)[0]
    sender = Address(display_name=customer.name, addr_spec=f"{local}@example.org")
    hour = rng.randrange(7, 23)
    minute = rng.randrange(60)
    offset = timezone(timedelta(hours=rng.choice((0, 1, 2))))
    sent = datetime(m.day.year, m.day.month, m.day.day, hour, minute, rng.randrange(60), tzinfo=offset)

    body = _wrap(m.body)
    quote_style = rng.randrange(3) if m.kind == "theme" else 0  # 0 plain, 1 top-posted, 2 bottom-posted
    subject = m.subject or "(no subject)"
    if quote_style:
        earlier = sent - timedelta(days=rng.randrange(1, 4), hours=rng.randrange(1, 6))
        staff = rng.choice(_STAFF)
        quoted_lines = [
            f"Hi {customer.first},",
            "",
            *textwrap.wrap(rng.choice(_SHOP_REPLIES), width=68),
            "",
            "Best wishes,",
            f"{staff} at {SHOP_SHORT}",
        ]
        quote = "\n".join(f"> {line}".rstrip() if line else ">" for line in quoted_lines)
        when = format_datetime(earlier).rsplit(":", 1)[0]
        attribution = f"On {when}, {SHOP_NAME} <{SHOP_ADDRESS}> wrote:"
        if not subject.lower().startswith("re:"):
            subject = f"Re: {subject}"
    else:
        quote = attribution = ""
    signature = ""
    if m.kind == "theme" and (quote_style or rng.random() < 0.4):
        signature = "-- \n" + rng.choice(_SIGNATURES).format(**ctx)
    if quote_style == 1:
        parts = [body, signature, f"{attribution}\n{quote}"]
    elif quote_style == 2:
        parts = [f"{attribution}\n{quote}", body, signature]
    else:
        parts = [body, signature]
    text = "\n\n".join(p for p in parts if p) + "\n"

    msg = EmailMessage()
    msg["From"] = sender
    msg["To"] = Address(display_name=SHOP_NAME, addr_spec=SHOP_ADDRESS)
    msg["Subject"] = subject
    msg["Date"] = format_datetime(sent)
    msg["Message-ID"] = f"<{m.message_id}.{m.day:%Y%m%d}@example.org>"
    msg.set_content(text)
    if multipart:
        msg.add_alternative(f"<html><body>\n{_paragraphs_html(m.body)}</body></html>\n", subtype="html")
        msg.set_boundary(f"==tendrilwick-{m.message_id}==")
    return msg.as_bytes()


_NAV = (
    '<nav class="site-menu">\n'
    "  <ul>\n"
    '    <li><a href="/">Home</a></li>\n'
    '    <li><a href="/shop">Shop all plants</a></li>\n'
    '    <li><a href="/pots">Pots &amp; planters</a></li>\n'
    '    <li><a href="/care">Care guides</a></li>\n'
    '    <li><a href="/delivery">Delivery &amp; returns</a></li>\n'
    '    <li><a href="/account">My account</a></li>\n'
    "  </ul>\n"
    "</nav>\n"
)
_STYLE = (
    "<style>\n"
    "  body { font-family: sans-serif; margin: 2em auto; max-width: 40em; }\n"
    "  .site-menu ul { list-style: none; display: flex; gap: 1em; }\n"
    "  .site-menu a { color: #2f5d3a; text-decoration: none; }\n"
    "</style>\n"
)
_SCRIPT = (
    "<script>\n"
    "  window.tw = window.tw || [];\n"
    "  function track(event) { window.tw.push({event: event, page: 'contact-form'}); }\n"
    "  track('message_view');\n"
    "</script>\n"
)


def _paragraphs_html(text: str) -> str:
    """`text` as HTML paragraphs: blank lines separate paragraphs, single newlines become <br>."""
    paragraphs = [p for p in text.split("\n\n") if p.strip()]
    return "".join(f"<p>{html.escape(p, quote=False).replace(chr(10), '<br>')}</p>\n" for p in paragraphs)


def _build_html(m: _Message) -> str:
    subject = m.subject or "Contact form message"
    body_html = _paragraphs_html(m.body)
    return (
        "<!DOCTYPE html>\n"
        '<html lang="en">\n'
        "<head>\n"
        '<meta charset="utf-8">\n'
        f'<meta name="message-id" content="{m.message_id}">\n'
        f'<meta name="received" content="{m.day.isoformat()}">\n'
        f'<meta name="product" content="{html.escape(m.product)}">\n'
        f"<title>{html.escape(subject, quote=False)}</title>\n"
        f"{_STYLE}{_SCRIPT}"
        "</head>\n"
        "<body>\n"
        f"{_NAV}"
        "<main>\n"
        f"<h1>{html.escape(subject, quote=False)}</h1>\n"
        f"{body_html}"
        "</main>\n"
        "</body>\n"
        "</html>\n"
    )


def _main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        description=f"Write the invented '{SHOP_NAME}' demo collection of customer messages."
    )
    parser.add_argument("folder", type=Path, help="output folder (created if missing)")
    parser.add_argument("--seed", type=int, default=7, help="random seed (default: 7)")
    parser.add_argument("-n", "--n-messages", type=int, default=1500, help="message count (default 1500)")
    args = parser.parse_args(argv)
    folder = write_demo_collection(args.folder, seed=args.seed, n_messages=args.n_messages)
    resolved = folder.resolve()
    print(f"wrote {args.n_messages} messages to {folder}")
    print(f"answer key: {resolved.parent / (resolved.name + '-planted_themes.csv')}")
    return 0


if __name__ == "__main__":
    raise SystemExit(_main())
