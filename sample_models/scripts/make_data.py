"""Generate the invented "Tidewren Ferries" intent data set.

Tidewren Ferries is a made-up operator that links the made-up islands and harbours of the
Saltmarrow Sound. Customers write short requests to its chat assistant; every request
carries one of sixteen intents. Nothing here describes a real company or a real place.

The generator is seeded and deterministic. It writes two CSV files with the columns
``text,label``:

* ``sample_models/data/ferry_train.csv``: utterances filled from the *training* template
  pools, with casual and formal register, small talk, openers, sign-offs and typos.
* ``sample_models/data/ferry_eval.csv``: a held-out split built from *different* template
  pools: sentence frames never used in training (most reuse the everyday vocabulary,
  a few are idioms the training split never shows), rare slot values (harbours,
  vehicles, pets, items and days absent from training), some unseen openers and small
  talk, and a "hard" pool of negations and messages with two cues, where the label is
  the customer's actual request.

No eval text appears in the training split, not even after lower-casing and stripping
punctuation.

Usage::

    python sample_models/scripts/make_data.py [--seed N] [--out-dir DIR]
"""

from __future__ import annotations

import argparse
import csv
import random
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

SEED = 20240611
DEFAULT_OUT_DIR = Path(__file__).resolve().parents[1] / "data"
TRAIN_FILE = "ferry_train.csv"
EVAL_FILE = "ferry_eval.csv"

LABELS: tuple[str, ...] = (
    "book_crossing",
    "change_booking",
    "cancel_booking",
    "refund_status",
    "timetable",
    "disruption_status",
    "vehicle_fares",
    "foot_passenger_fares",
    "pets_on_board",
    "luggage_allowance",
    "accessibility_help",
    "lost_property",
    "food_on_board",
    "speak_to_agent",
    "greeting",
    "loyalty_points",
)

# Rows per intent. Greetings are short and repetitive, so there are fewer of them.
TRAIN_ROWS = 240
TRAIN_ROWS_GREETING = 180
EVAL_HELD_OUT_ROWS = 28
EVAL_HARD_ROWS = 5
EVAL_HELD_OUT_ROWS_GREETING = 14
EVAL_HARD_ROWS_GREETING = 4

# ---------------------------------------------------------------------------------------
# Slot values. Every place, vessel and scheme name below is invented. Entity slots (ports,
# dates, vehicles, ...) vary the facts; lexical slots (``change``, ``refund``, ``human``,
# ...) vary the wording, so that training covers the everyday synonyms customers use.
# ---------------------------------------------------------------------------------------

SLOTS: dict[str, tuple[str, ...]] = {
    # entities
    "port": (
        "Quillhaven",
        "Marrowby",
        "Tolland Isle",
        "Fennick Quay",
        "Brackmere",
        "Skerrowlan",
        "Orlestow",
        "Vennisholm",
        "Gullcarrick",
        "Ardlowen",
    ),
    "day": (
        "Monday",
        "Tuesday",
        "Wednesday",
        "Thursday",
        "Friday",
        "Saturday",
        "Sunday",
        "tomorrow",
        "next Tuesday",
        "this Saturday",
        "friday",
        "sunday",
        "the weekend",
    ),
    "date": (
        "3 June",
        "14th August",
        "the 22nd",
        "12/07",
        "July 9th",
        "1 September",
        "the 5th of May",
        "28 October",
        "2nd April",
        "the 30th",
        "19/08",
        "11 March",
    ),
    "time": (
        "7:15",
        "09:40",
        "18:00",
        "2.30pm",
        "8am",
        "6pm",
        "11:05",
        "16:20",
        "noon",
        "half seven",
        "13:45",
        "7pm",
        "10am",
    ),
    "n": ("2", "3", "4", "5", "6", "two", "three", "four", "five"),
    "ref": (
        "TW48213",
        "TW10977",
        "TW55302",
        "TW83140",
        "tw29918",
        "TW-66021",
        "#TW70514",
        "TW31157",
        "TW90482",
        "tw44730",
    ),
    "vehicle": (
        "car",
        "van",
        "campervan",
        "motorbike",
        "estate car",
        "pickup",
        "car and trailer",
        "minibus",
        "transit van",
        "people carrier",
        "small car",
        "caravan",
        "4x4",
    ),
    "pet": (
        "dog",
        "puppy",
        "cat",
        "labrador",
        "spaniel",
        "collie",
        "terrier",
        "greyhound",
        "rabbit",
        "two dogs",
        "pet",
        "old dog",
    ),
    "item": (
        "phone",
        "wallet",
        "jacket",
        "sunglasses",
        "teddy bear",
        "rucksack",
        "laptop",
        "earring",
        "scarf",
        "purse",
        "headphones",
        "camera",
        "watch",
        "glasses",
        "coat",
    ),
    "bag": (
        "suitcase",
        "two suitcases",
        "big rucksack",
        "surfboard",
        "set of golf clubs",
        "pram",
        "cool box",
        "bike bag",
        "holdall",
        "guitar",
        "large case",
        "tent",
    ),
    "food": (
        "breakfast",
        "hot food",
        "coffee",
        "vegan food",
        "sandwiches",
        "gluten free food",
        "hot drinks",
        "fish and chips",
        "vegetarian meals",
        "soup",
        "cake",
        "tea",
        "beer",
    ),
    "amount": ("£18", "£42.50", "30 quid", "£120", "£64", "£9.80", "£210"),
    "greet": (
        "hi",
        "hello",
        "hey",
        "hiya",
        "good morning",
        "good afternoon",
        "good evening",
        "morning",
        "hello there",
        "hi there",
        "hey there",
        "afternoon",
    ),
    "crew": ("Tidewren", "team", "ferry people", "folks", "all", "everyone", "tidewren team"),
    # wording
    "ask": (
        "can I",
        "could I",
        "I want to",
        "I'd like to",
        "I need to",
        "is it possible to",
        "how do I",
        "how can I",
        "I wanna",
        "we need to",
        "we'd like to",
        "am I able to",
        "would it be possible to",
        "i have to",
        "help me",
        "I would like to",
    ),
    "askyou": (
        "can you",
        "could you",
        "please",
        "would you",
        "I need you to",
        "kindly",
        "pls",
        "could you please",
        "can u",
    ),
    "booking": (
        "booking",
        "reservation",
        "ticket",
        "crossing",
        "sailing",
        "trip",
        "journey",
        "tickets",
        "return",
        "booking {ref}",
    ),
    "change": (
        "change",
        "move",
        "switch",
        "swap",
        "amend",
        "modify",
        "reschedule",
        "rebook",
        "shift",
        "alter",
        "transfer",
        "update",
        "edit",
    ),
    "cancel": (
        "cancel",
        "scrap",
        "call off",
        "drop",
        "void",
        "withdraw",
        "get rid of",
        "remove",
        "terminate",
        "annul",
        "kill",
    ),
    "refund": (
        "refund",
        "money back",
        "reimbursement",
        "repayment",
        "refund money",
        "money",
        "cash",
        "credit",
    ),
    "price": (
        "how much is",
        "what's the price of",
        "what does it cost for",
        "price for",
        "cost of",
        "what's the fare for",
        "how much do you charge for",
        "tariff for",
        "rates for",
        "fare for",
        "how much for",
        "what do I pay for",
        "prices for",
    ),
    "foot": (
        "foot passenger",
        "walk-on passenger",
        "passenger on foot",
        "pedestrian",
        "walk on passenger",
        "person without a car",
        "passenger with no vehicle",
        "cyclist",
        "adult on foot",
        "child on foot",
    ),
    "trouble": (
        "delayed",
        "cancelled",
        "running late",
        "disrupted",
        "off",
        "suspended",
        "held up",
        "running",
        "on time",
        "going ahead",
        "still sailing",
        "affected by the weather",
        "behind schedule",
        "broken down",
    ),
    "weather": (
        "the wind",
        "the storm",
        "the fog",
        "the gales",
        "high winds",
        "the swell",
        "the weather",
        "the forecast",
        "the tech fault",
        "engine trouble",
        "rough seas",
    ),
    "when": ("what time is", "when is", "when's", "what time's", "times for", "departure time of"),
    "which": ("first", "last", "next", "earliest", "latest", "final", "morning", "evening"),
    "sched": (
        "timetable",
        "schedule",
        "sailing times",
        "departure times",
        "ferry times",
        "crossing times",
        "times",
        "sailings",
    ),
    "ferry": ("ferry", "boat", "sailing", "crossing", "vessel"),
    "onboard": (
        "on board",
        "on the ferry",
        "on the boat",
        "aboard",
        "during the crossing",
        "on the {time}",
    ),
    "allowed": ("allowed", "permitted", "ok", "welcome", "able to come", "fine", "let on"),
    "luggage": (
        "luggage",
        "baggage",
        "bags",
        "suitcases",
        "cases",
        "hand luggage",
        "kit",
        "hold luggage",
    ),
    "limit": ("allowance", "limit", "restriction", "maximum", "rules", "policy", "weight limit"),
    "lost": ("lost", "left", "forgot", "dropped", "mislaid", "misplaced", "left behind"),
    "found": ("handed in", "found", "picked up", "turned in", "recovered"),
    "eat": (
        "food",
        "something to eat",
        "snacks",
        "meals",
        "drinks",
        "a cafe",
        "a restaurant",
        "a bar",
        "hot food",
        "refreshments",
    ),
    "human": (
        "person",
        "human",
        "agent",
        "real person",
        "member of staff",
        "someone",
        "advisor",
        "operator",
        "representative",
        "manager",
        "real human",
        "customer service",
        "staff",
        "employee",
        "live agent",
    ),
    "talk": (
        "speak to",
        "talk to",
        "chat with",
        "be put through to",
        "be connected to",
        "get hold of",
        "reach",
    ),
    "points": (
        "points",
        "Wrenpoints",
        "rewards points",
        "loyalty points",
        "Tidewren Rewards points",
        "reward balance",
    ),
    "mobility": (
        "a wheelchair",
        "a mobility scooter",
        "a walking frame",
        "crutches",
        "a walking stick",
        "a guide dog",
        "limited mobility",
        "a disability",
        "poor eyesight",
        "hearing difficulties",
    ),
    "condition": (
        "deaf",
        "blind",
        "partially sighted",
        "hard of hearing",
        "autistic",
        "a wheelchair user",
        "disabled",
        "registered blind",
        "unsteady on my feet",
        "visually impaired",
    ),
    "family": ("mum", "dad", "son", "daughter", "wife", "husband", "gran", "friend", "grandad"),
    "assist": ("assistance", "help", "support", "special assistance", "a hand", "someone to help"),
    "access": (
        "step free access",
        "a lift",
        "a ramp",
        "accessible toilets",
        "disabled parking",
        "a hearing loop",
        "accessible seating",
        "priority boarding",
    ),
}

# Values that appear only in the eval split: the rare words.
EVAL_ONLY_SLOTS: dict[str, tuple[str, ...]] = {
    "port": ("Caddowick", "Little Skerrowlan", "Hobbin Strand", "Penmorrow Rock"),
    "vehicle": ("motorhome", "horsebox", "quad bike", "electric hatchback", "tractor"),
    "pet": ("ferret", "parrot", "whippet", "tortoise", "hamster"),
    "item": ("hearing aid", "walking pole", "e-reader", "umbrella", "car keys", "passport"),
    "bag": ("kayak", "double bass", "wheelie case", "paddleboard"),
    "food": ("halal food", "oat milk", "a kids meal", "dairy free options"),
    "greet": ("ahoy", "yo", "howdy", "hullo", "evening", "greetings"),
    "day": ("Whit Monday", "the bank holiday", "boxing day"),
}

EVAL_RARE_SLOT_RATE = 0.1

# ---------------------------------------------------------------------------------------
# Template pools. ``train`` is used only for the training split. ``held_out`` holds
# paraphrases whose sentence frames never occur in training. ``hard`` holds negations and
# messages with two cues; their label is what the customer actually asks for.
# ---------------------------------------------------------------------------------------


@dataclass(frozen=True)
class IntentPool:
    """The three disjoint template pools of one intent."""

    train: tuple[str, ...]
    held_out: tuple[str, ...]
    hard: tuple[str, ...]


POOLS: dict[str, IntentPool] = {
    "book_crossing": IntentPool(
        train=(
            "not changing anything, I want a new {booking} for {date}",
            "{ask} book another crossing, separate from my current {booking}",
            "{ask} book {n} tickets for the {ferry} to {port}",
            "do you have room on the {time} to {port}? {ask} book",
            "{askyou} book me onto a {ferry} to {port2} on {date}",
            "I'd like to book for {n} adults, {port} to {port2}",
            "booking request: {port} to {port2}, {date}, {n} people",
            "{ask} book passage for me and my {vehicle} on {day}",
            "want {n} seats on a {ferry} to {port} next week",
            "is it possible to book a {ferry} for {date}",
            "first time travelling with you, {ask} book a crossing",
            "{ask} book the {time} and the return on {day}",
            "{ask} book a crossing from {port} to {port2} on {day}",
            "{ask} get {n} seats to {port} on {date}",
            "are there spots left on the {time}? want to book",
            "{askyou} sort out a crossing for {n} of us to {port}",
            "we're heading to {port} on {day}, {ask} get on a {ferry}",
            "{ask} book the {time} {ferry} to {port} for {n} people",
            "book me on a {ferry} to {port} {day}",
            "{ask} reserve a {ferry} to {port} on {date}",
            "need tickets to {port} for {n} adults on {day}",
            "{askyou} book {n} seats on the {time} from {port}",
            "looking to book a return to {port} on {date}",
            "{askyou} get me on the boat to {port} {day} morning",
            "want to book a trip over to {port} with my {vehicle}",
            "I would like to make a booking for {date}, {port} to {port2}",
            "{ask} reserve a space for my {vehicle} on the {time} to {port}",
            "book a return for {n} to {port}, going {day}",
            "is there space on the {time} {ferry}? I want to book",
            "new booking please, {port} to {port2} on {date}",
            "i need to get to {port} on {day}, can i book here",
            "{ask} book a single to {port}",
            "make a reservation for {n} passengers {port} to {port2}",
            "{askyou} book us onto the {date} {ferry} to {port}",
            "get me a ticket for the {ferry} {day}",
            "booking a crossing for me and the kids on {date}",
            "{ask} buy tickets for the {time} boat",
            "any availability on the {time} to {port}? id like to book",
            "We would like to book a crossing for {n} adults and a {vehicle}",
            "{ask} reserve a place on the {ferry} to {port}",
            "book the {which} boat to {port} on {day}",
            "{ask} purchase a return ticket to {port}",
            "sort me out a ticket to {port} for {day}",
            "I already have one booking but want to book a second crossing for {date}",
            "book {n} of us on the {time}, we have a {pet} too",
            "{ask} get seats on a {ferry} over to {port}",
            "{ask} travel to {port} on {date}, can I book that",
            "tickets for {n} please, {port} {day}",
            "{ask} arrange a crossing to {port} for {date}",
            "a {vehicle} and {n} passengers on the {time} please, new booking",
            "put {n} of us on a boat heading for {port} on {date}",
            "I'm hoping to secure passage to {port} this {day}",
            "fancy going across to {port} {day}, can you sort tickets",
            "whats the process for getting a seat on the {time} to {port}",
            "I need to arrange travel for {n} people over to {port} on the {date} ferry",
            "can we grab {n} spots on the first boat to {port}",
            "set up a trip {port} to {port2} for {date}",
            "Kindly arrange a sailing for myself to {port} on {date}.",
            "could i get onto the {time} from {port} if i pay now",
            "planning a weekend on {port2}, how do I get a ticket for the crossing",
            "hold a place for a {vehicle} and {n} people on the {time}",
        ),
        held_out=(
            "{n} adults to {port} on the {time} please, we'd like to book",
            "I'm after a {booking} for {date}, {port} to {port2}, can you book it",
            "hoping to book the {which} {ferry} from {port} this {day}",
            "our family wants to book a {ferry} over to {port} on {date}",
            "I'd like to travel out to {port} on {day} - can that be arranged",
            "{ask} book {n} seats on the {which} {ferry} to {port2}",
            "we want to book a {ferry} from {port} on {date} for {n}",
            "please book a return crossing to {port} for {day}",
            "{ask} book tickets to {port2}, travelling {day}",
            "book {n} adults onto the {date} {ferry} please",
        ),
        hard=(
            "not a change, a completely new booking for {date} to {port}",
            "I already have a booking for {day} but I want to book another one for my parents",
            "just book me on the {time}, doesn't matter what the fare is",
            "the website keeps crashing so can you book the {time} to {port} for me",
            "booking for {n} plus my {pet} on the {date} sailing",
            "i want to book, not cancel - {port} to {port2} on {day}",
            "my old trip was refunded, now I want a fresh crossing on {date}",
            "after seeing the timetable I'd like seats on the {time} to {port}",
        ),
    ),
    "change_booking": IntentPool(
        train=(
            "I don't want to {cancel} it, just {change} it to {day}",
            "not looking for a {refund}, I want to {change} my {booking}",
            "my {time} got cancelled, {ask} move to a later {ferry}",
            "{askyou} {change} my {booking} to a different day",
            "I have a {booking} for {day} but need {day2}, {ask} {change} it",
            "{ask} {change} the time on {ref}",
            "my {booking} needs to be on {date} instead",
            "{ask} {change} my {booking} to a different {ferry}",
            "got the wrong time on my {booking}",
            "{ask} {change} the {date} {booking} to the {time}",
            "my plans have changed, can the {booking} be moved",
            "same {booking}, different time please",
            "{ask} {change} from the {time} to a later {ferry}",
            "I need to {change} my {booking} to {day}",
            "can I use my ticket for a later {ferry} instead",
            "we'll miss the {time}, {ask} go on the next one instead",
            "{ask} {change} {ref} to a later boat",
            "{ask} {change} my {booking} from {day} to {day2}",
            "{change} booking {ref} to the {time} {ferry}",
            "is it possible to amend my reservation",
            "I want to switch to a later {ferry} on {date}",
            "{ask} swap my crossing to an earlier time",
            "{askyou} change the date on my ticket to {date}",
            "how do I {change} my {booking} online",
            "need to rebook onto the {time} instead",
            "{ask} change the vehicle on my booking to a {vehicle}",
            "I'd like to {change} booking {ref}",
            "{change} my trip to {port} to {date}",
            "{askyou} {change} my {booking} to {day2}",
            "alter my return date to {date} please",
            "we want to go a day later, can the booking be changed",
            "change the name on booking {ref}",
            "add another passenger to my booking {ref}",
            "is there a fee to {change} my {booking}",
            "I booked the {time} but need the {time2}, can you swap it",
            "{askyou} {change} my {booking} to {date}?",
            "no need to {cancel}, can I just move it to {day}",
            "not cancelling, just want a different time on {ref}",
            "update my booking {ref} to {n} passengers",
            "{change} my crossing from {port} to {port2}",
            "i need to reschedule my {ferry}",
            "put my {booking} back a week",
            "bring my {booking} forward to {day}",
            "{ask} push my {booking} back to {date}",
            "my {time} was cancelled, please move me to the {time2}",
            "{ask} travel on {day2} instead of {day}",
            "{ask} {change} the time of my {booking}",
            "I'm on the {time} but want a later one",
            "wrong date on my {booking}, it needs to be {date}",
            "{ask} {change} my {booking}, not cancel it",
            "my plans shifted, can the {date} crossing become a {day2} one",
            "any chance of shuffling booking {ref} to a later boat",
            "would it be possible to reorganise my trip for {date}",
            "I'm running late, can I hop on the next boat with my existing ticket",
            "got the wrong day on my booking, should be {day}",
            "edit my reservation, we now travel with a {vehicle}",
            "need to tweak the time on {ref}",
            "I would be grateful if my {booking} could be moved to the {date} sailing.",
            "can i go on {day2} instead of {day} with the same ticket",
            "switch me off the {time} onto something later",
        ),
        held_out=(
            "{askyou} {change} the {date} {booking} over to {day2}",
            "I have {ref} for {day} but it should be {day2}, {ask} {change} it",
            "the {time} doesn't suit anymore, {ask} {change} to the {time2}",
            "we need a different {ferry} on {date}, same booking",
            "same trip, different day please - {ref}",
            "{ask} {change} {ref} to {day2} please",
            "please {change} my {booking} from the {time} to the {time2}",
            "our {booking} is for {day} but we need {day2} now",
            "{change} my {ferry} to {date}, I can't make the original",
            "{ask} {change} the date of my {booking}",
        ),
        hard=(
            "don't cancel it, just move it to {day}",
            "I don't want a refund, I want to swap the {time} for the {time2}",
            "please don't cancel {ref}, I only need a different date",
            "the {time} is cancelled for weather so put me on the {time2}",
            "not after my money back, just need to travel on {date} instead",
            "I'd rather not cancel, could the trip go to {day2}",
            "what would it cost to change my booking to a {vehicle}",
            "drop the {time} and put me on the {time2} instead",
            "keep the booking but make it {date}",
        ),
    ),
    "cancel_booking": IntentPool(
        train=(
            "I don't want to {change} it, please {cancel} {ref}",
            "not a date change, I want to {cancel} the {booking}",
            "{cancel} my {booking}, I'll ask about the {refund} after",
            "{askyou} {cancel} the {booking} for {date}, we can't travel",
            "something came up so {ask} {cancel} my {booking}",
            "we won't need the {time} on {day}, {cancel} please",
            "{cancel} {ref}, we're not travelling",
            "{ask} {cancel} my {booking} to {port}",
            "plans changed, we don't need the {booking} any more, {cancel} it",
            "no longer travelling on {date}, please {cancel}",
            "{askyou} {cancel} the {time} {ferry} I booked",
            "I want to {cancel} my {booking}",
            "take me off the {time} {ferry}, we won't travel",
            "{ask} undo my {booking} for {date}",
            "we won't be coming on {day}, {cancel} the {booking}",
            "give up our seats on the {time}, we're not going",
            "{cancel} booking {ref} please",
            "how do I {cancel} my {ferry} ticket",
            "{askyou} {cancel} my {booking} on {date}",
            "we can no longer travel, {cancel} our {booking}",
            "{ask} {cancel} the {time} to {port}",
            "{ask} cancel my trip and get my money back",
            "cancel my return journey",
            "i dont need the {booking} anymore",
            "{askyou} remove booking {ref}",
            "{askyou} cancel the whole booking",
            "I would like to {cancel} my {booking} for {date}",
            "is there a cancellation fee",
            "cancel everything on my account for {day}",
            "we're not going anymore, scrap the {booking}",
            "Kindly cancel booking {ref}.",
            "{cancel} my {booking}, family emergency",
            "I have to cancel, what happens to my money",
            "{cancel} the {date} booking for {n} people",
            "what's the cancellation policy if I cancel today",
            "how late can I {cancel} my {booking}",
            "i dont want to move it, i want to cancel it",
            "{askyou} call off my crossing to {port}",
            "void my ticket for {day}",
            "cancel just the return leg",
            "drop my {booking} for {day}",
            "no need to rebook, just {cancel} {ref}",
            "we can't make the {time} anymore, {cancel} it",
            "not travelling on {day}, {cancel} my {booking}",
            "{ask} {cancel} my {booking}, not change it",
            "plans fell through, please {cancel} the {date} {ferry}",
            "our trip to {port} is off, please withdraw the reservation",
            "I'll no longer be needing the {date} crossing, terminate it please",
            "we've decided against going, kill booking {ref}",
            "can you scrub the {time} sailing from my account",
            "I wish to annul my {booking} {ref}",
            "not travelling after all, take us off the {date} boat",
            "How do I back out of the trip I booked for {day}",
            "forget the whole trip, we aren't coming",
            "please write off my {date} booking, things fell through",
        ),
        held_out=(
            "{askyou} {cancel} the {booking} we made for {date}, we can't go",
            "we won't make the {time} on {day} so please {cancel} it",
            "booking {ref} needs to be cancelled, we're not travelling",
            "something came up, please {cancel} our {booking} to {port}",
            "release my seats on the {time}, someone else can have them",
            "{ask} {cancel} my {booking} for {day}, we're not going",
            "please {cancel} our {ferry} to {port2} on {date}",
            "{cancel} the {time} {booking} please, can't travel",
            "I won't be travelling, {cancel} {ref}",
            "{ask} {cancel} the tickets for {n} people",
        ),
        hard=(
            "I don't want to change the date, I want to cancel the whole thing",
            "no rebooking thanks, just cancel {ref}",
            "the {time} is running fine but I need to cancel my place on it",
            "cancel it, I'll worry about the refund later",
            "forget moving it to {day}, just cancel",
            "don't move my booking, cancel it",
            "my {pet} is ill so we have to cancel {date}",
            "Please cancel rather than amend booking {ref}.",
            "I booked the {time} by mistake, please undo it",
        ),
    ),
    "refund_status": IntentPool(
        train=(
            "I'm not rebooking, just tell me where my {refund} is",
            "my {ferry} was cancelled by you, where is my {refund}",
            "I cancelled {ref} last month, where's my {refund}",
            "{askyou} tell me where my {refund} is",
            "has the {refund} for {ref} been sent",
            "how long until my {refund} comes back, I cancelled {day}",
            "still waiting for the {refund} from the cancelled {time}",
            "I was told I'd get a {refund} {n} weeks ago",
            "chasing my {refund} for the {date} {ferry}",
            "the {refund} from my cancellation never came",
            "is my {refund} on its way",
            "where is my {refund}",
            "you owe me {amount} for a cancelled {ferry}",
            "I'm due {amount} back for {ref}, where is it",
            "nothing back on my card yet for the {date} cancellation",
            "when will the {refund} for {ref} be back in my account",
            "I cancelled {day} and haven't had my {refund}",
            "when will I get my {refund} for booking {ref}",
            "how long do refunds take",
            "my {refund} still hasn't arrived",
            "I was promised a {refund}, what's the status",
            "has my {refund} been processed",
            "still waiting on a {refund} for {ref}",
            "the {refund} for my cancelled {ferry} hasn't come through",
            "{askyou} check the status of my {refund}",
            "it's been {n} weeks and no {refund}",
            "I'd like an update on my {refund} please",
            "{refund} not showing on my card",
            "You cancelled my crossing, when is the {refund} coming",
            "how many days until the {refund} hits my account",
            "did my {refund} go through",
            "I got an email saying refunded but no money",
            "track my {refund}",
            "why haven't i received my {refund}",
            "Could you confirm when my {refund} will be issued?",
            "the money for booking {ref} hasn't come back yet",
            "{refund} for the {date} cancellation, please chase",
            "am I getting refunded for the cancelled {time}",
            "I'm owed {amount} from a cancelled trip",
            "the {amount} {refund} isn't in my bank",
            "any update on the {refund} for {ref}",
            "still no {refund}, I cancelled {n} weeks ago",
            "when does the {refund} reach my card",
            "still no sign of the cash from my cancelled crossing",
            "my bank shows nothing back from you yet for {ref}",
            "any news on {refund} for the {date} trip",
            "I'm chasing a repayment that was due {n} days ago",
            "when does the credit appear after a cancellation",
            "Could you advise on the progress of my reimbursement?",
            "the {amount} you owe me still hasn't landed",
            "has the money been sent back to my card yet",
            "waiting forever for my money, booking {ref}",
        ),
        held_out=(
            "booking {ref} was cancelled, has the {refund} been sent yet",
            "how much longer for my {refund}, it's been {n} weeks",
            "I still don't have the {refund} for the cancelled {date} {ferry}",
            "can you chase the {amount} {refund} for me",
            "what's happening with the {amount} I'm due back",
            "I still haven't received my {refund} for {ref}",
            "where's the {refund} for my cancelled {booking}",
            "{refund} for the cancelled {time} still not here",
            "has my {refund} for {date} been paid",
            "when do I get the {refund} from the cancelled {ferry}",
        ),
        hard=(
            "I cancelled on {day} and still haven't seen the money",
            "you cancelled my sailing last week, where's my refund",
            "cancelled booking {ref} a fortnight ago, when will the money land",
            "not trying to cancel anything, just want to know where my refund is",
            "the {time} was called off due to weather, when do I get reimbursed",
            "I don't want to rebook, I want the refund you promised",
            "do refunds go back as Wrenpoints or to my card",
            "you charged me twice for the {vehicle}, is that {amount} coming back",
        ),
    ),
    "timetable": IntentPool(
        train=(
            "not about delays, {when} the {which} {ferry}",
            "before I book, what {sched} are there on {day}",
            "{ask} find out the {sched} to {port}",
            "{when} the {which} {ferry} to {port2} on {day}",
            "what {sched} run on {day} from {port}",
            "{askyou} tell me the {sched} for {port} to {port2}",
            "how long does it take to cross to {port}",
            "is there an early {ferry} on {date}",
            "when do {ferry}s leave {port} in the evening",
            "does a {ferry} go every hour to {port}",
            "which {ferry}s go to {port} on {date}",
            "what time does the {ferry} get to {port2}",
            "{when} the {which} {ferry} to {port}",
            "when does the {which} boat leave {port}",
            "{sched} from {port} to {port2} on {day}",
            "how often do the ferries run to {port}",
            "what {sched} are there on {date}",
            "{ask} see the {sched} for {day}",
            "is there a {ferry} to {port} on {day} evening",
            "what time does the {port} boat get in",
            "how long is the crossing to {port}",
            "{when} the next {ferry} to {port}",
            "do you run on sundays",
            "{sched} for the winter please",
            "what time do I need to check in for the {time}",
            "are there any late sailings on {day}",
            "how many crossings a day to {port}",
            "Could you tell me the {sched} for {date}?",
            "{which} sailing tomorrow from {port}?",
            "what's the {sched} between {port} and {port2}",
            "is the summer {sched} out yet",
            "when does the {time} arrive in {port}",
            "does the {ferry} go to {port} on bank holidays",
            "{which} crossing back from {port} tonight?",
            "what time should I arrive at {port} terminal before sailing",
            "{sched} {day}",
            "{when} the {which} {ferry} from {port} on {date}",
            "{ask} get the {sched} for {port2}",
            "how long does the {ferry} take",
            "is there a {ferry} after {time} on {day}",
            "how early does the boat set off from {port} in the morning",
            "what are the departure slots for {port} on {date}",
            "I need the sailing pattern for next month",
            "when's the final boat home from {port} on a {day}",
            "is there anything leaving {port} after 9 at night",
            "could you list the crossings to {port2} on {day}",
            "how long does it take to get across to {port}",
            "When might I expect the vessel to reach {port2}?",
            "what's on the board for sailings tomorrow",
        ),
        held_out=(
            "I'm travelling {day}, {when} the {which} {ferry} out of {port}",
            "are there {ferry}s to {port2} every day in winter",
            "can you send me the {sched} for {port} on {date}",
            "what's the {which} departure from {port} to {port2}",
            "what hours does the {port} route operate",
            "{when} the {which} {ferry} on {day} to {port2}",
            "what {sched} are there from {port} {day}",
            "{ask} see the {sched} for {date}",
            "when does the {which} {ferry} sail to {port}",
            "how often does the {ferry} go to {port2} on {day}",
        ),
        hard=(
            "not asking about delays, just what time the first boat leaves {port} on {day}",
            "is the {time} a regular sailing or just in summer",
            "normally what time is the last one back, assuming no weather problems",
            "I want to book later but first, what times run on {date}",
            "how much later is the second crossing on {day}",
            "no problem with my booking, I just need the return times from {port}",
            "is the {time} every day or only weekdays",
        ),
    ),
    "disruption_status": IntentPool(
        train=(
            "I'm not cancelling, just checking if the {time} is {trouble}",
            "booked on the {time}, is it {trouble} with {weather}",
            "is {weather} affecting the {time} {ferry}",
            "{askyou} tell me if the {time} is {trouble}",
            "with {weather}, are sailings to {port} {trouble}",
            "is today's service {trouble}",
            "any news on the {time}, is it {trouble}",
            "has {weather} stopped the {ferry}s today",
            "are the {ferry}s {trouble} this morning",
            "is the {time} to {port2} still on with {weather}",
            "the {ferry} hasn't left yet, is it {trouble}",
            "is the {time} {ferry} {trouble} today",
            "the {time} hasn't turned up at {port}, is it {trouble}",
            "any hold ups on the {port} route",
            "has the {ferry} broken down",
            "is the {time} {ferry} behind schedule",
            "is there a reduced service today because of {weather}",
            "are sailings cancelled because of {weather}",
            "is the {ferry} to {port} {trouble}",
            "any disruption on the {port} route today",
            "is the {time} from {port} {trouble}",
            "has the {time} been cancelled",
            "are the boats running in {weather}",
            "I heard the {ferry} is off, is that true",
            "status of the {time} {ferry} please",
            "why is the {time} delayed",
            "is there a delay on the crossing to {port2}",
            "will the ferries run tomorrow with {weather}",
            "are there any cancellations today",
            "is the {port} boat going ahead",
            "how late is the {time} running",
            "Could you confirm whether the {time} to {port} is {trouble}?",
            "sailings suspended?",
            "is the {ferry} still on for {day} given {weather}",
            "the {time} hasn't arrived yet, what's happening",
            "live updates on today's sailings",
            "is the {time} affected by {weather}",
            "are there weather warnings for the crossing",
            "is the {port} service {trouble}",
            "I'm booked on the {time}, is it still going",
            "will {weather} stop the {ferry} {day}",
            "is the {which} {ferry} {trouble} because of {weather}",
            "any delays to the {time} {ferry}",
            "gale forecast tonight, will the last boat still go",
            "the boat hasn't turned up at {port} and it's past {time}",
            "is the crossing going to be scrapped with these swells",
            "are you running a normal service or is it reduced today",
            "how far behind schedule is the {time}",
            "Has there been any interruption to services to {port2} this morning?",
            "is the vessel broken down again",
            "fog here at {port}, is the {time} held up",
            "should i expect hold ups on {day}",
        ),
        held_out=(
            "with {weather} today is the {time} to {port} {trouble}",
            "just checking the {time} {ferry} isn't {trouble} today",
            "{weather} looks bad, are {ferry}s to {port} {trouble}",
            "has {weather} caused any cancellations on {day}",
            "heard rumours the {port} run is off, true?",
            "is the {time} to {port2} {trouble} because of {weather}",
            "are any {ferry}s {trouble} today",
            "is the {which} {ferry} {trouble} this evening",
            "any cancellations because of {weather} on {day}",
            "status of the {time} from {port}, is it {trouble}",
        ),
        hard=(
            "the timetable says {time} but is it actually running in this wind",
            "is the {time} from {port} going ahead or is it off",
            "don't need to change anything, just want to know if the {time} is late",
            "I see the {time} is cancelled, are the later ones affected",
            "before I cancel, is the {time} actually going ahead today",
            "storm's coming, will the last sailing actually leave",
            "my {vehicle} is booked on the {time}, is it delayed",
            "is the {time} off again or just late",
        ),
    ),
    "vehicle_fares": IntentPool(
        train=(
            "I'm not walking on, {price} the {vehicle}",
            "driving not walking, {price} a {vehicle}",
            "{askyou} tell me the fare for a {vehicle}",
            "{price} my {vehicle} on the {ferry} to {port}",
            "what's a {vehicle} going to cost on {date}",
            "{price} bringing a {vehicle} to {port2}",
            "we're driving a {vehicle}, {price} that",
            "fare for a {vehicle} plus {n} passengers",
            "how much more is a {vehicle} than a car",
            "cheapest way to take a {vehicle} over",
            "is there a weekday price for a {vehicle}",
            "{price} taking a {vehicle} across",
            "{price} a {vehicle} to {port}",
            "price for a car and {n} passengers",
            "{price} a return with a {vehicle}",
            "vehicle prices to {port}",
            "cost of taking my {vehicle} on the {ferry}",
            "do you charge more for a {vehicle} with a trailer",
            "what are your car fares in summer",
            "{price} a {vehicle} on the {time}",
            "is there a discount for electric cars",
            "Could you tell me the price for a {vehicle} and driver?",
            "how much does a {vehicle} cost one way",
            "{price} a car over 5 metres",
            "what do you charge for a {vehicle} to {port2}",
            "vehicle fare {port} to {port2}",
            "{price} a car with a roof box",
            "price of a car ticket for {date}",
            "is the fare cheaper if I book the car in advance",
            "how much for a car plus {n} adults return",
            "driving on, how much",
            "not walking on, how much is it with the {vehicle}",
            "{price} a {vehicle} and driver on {day}",
            "{price} {n} people in a {vehicle}",
            "bringing the {vehicle}, what's the fare",
            "what would it set me back to ship my {vehicle} over to {port}",
            "tariff for a {vehicle} on a weekday",
            "price to bring a {vehicle} across on {date}",
            "How are vehicles priced, by length or flat rate?",
            "cost for vehicle plus driver on the {time}",
            "would my {vehicle} be charged as a car or a van",
            "how pricey is it to take wheels over to {port}",
        ),
        held_out=(
            "I'm driving over in a {vehicle}, {price} that",
            "we'll bring the {vehicle} to {port} on {date}, what's the fare",
            "{price} a {vehicle} with {n} people inside",
            "cheapest fare for a {vehicle} to {port2}",
            "what's the going rate for a {vehicle} return",
            "{price} a {vehicle} on {date} to {port}",
            "what's the fare with a {vehicle} and {n} passengers",
            "{price} a {vehicle} return to {port2}",
            "how much to bring my {vehicle} over on the {time}",
            "fare for taking a {vehicle} please",
        ),
        hard=(
            "how much for me and my {vehicle}, I'm not a foot passenger",
            "my partner walks on but I'm driving, how much for the car",
            "I've booked already but what would adding a {vehicle} cost",
            "how much for the {vehicle}, the passengers are sorted",
            "does the car price include the passengers",
            "bringing the {vehicle} this time rather than walking, what's the charge",
            "fare for a {vehicle} if we cross at {time} rather than peak",
        ),
    ),
    "foot_passenger_fares": IntentPool(
        train=(
            "we're leaving the {vehicle} behind, {price} {n} adults",
            "no {vehicle} this time, just walking on, how much",
            "{askyou} tell me the fare for a {foot}",
            "{price} walking on to {port2}",
            "no car with us, {price} {n} adults",
            "{price} {n} people walking on",
            "ticket price for a {foot} on {date}",
            "we're on foot, how much is it to {port}",
            "what does a {foot} pay to {port}",
            "cheapest {foot} fare to {port}",
            "how much without a vehicle",
            "{price} a {foot} ticket",
            "price to walk on to {port}",
            "{price} an adult {foot} return",
            "fares for {n} foot passengers",
            "what does it cost without a car",
            "child fare for a {foot}",
            "how much to go across on foot",
            "walk on price {port} to {port2}",
            "is there a student discount for foot passengers",
            "senior fare for walking on",
            "{price} a single for a {foot}",
            "Could you tell me the {foot} fare to {port}?",
            "cost of a passenger ticket with no vehicle",
            "how much for a bike and rider",
            "{price} {n} adults walking on",
            "do under 5s travel free",
            "how much for me and my bike",
            "is it cheaper to walk on",
            "family ticket price, no car",
            "{foot} fares {date}",
            "{price} a {foot} to {port} on {day}",
            "no car, {price} {n} of us",
            "walking on, how much",
            "how much if we just stroll on with backpacks",
            "ticket cost for a pedestrian to {port}",
            "what do you charge people without a vehicle",
            "price for a cyclist to {port2}",
            "What is the passenger-only tariff for {n} adults?",
            "how much for a pensioner going over on foot",
            "carless fare please",
        ),
        held_out=(
            "we're walking on to {port}, {price} {n} of us",
            "{price} a {foot} on the {time}",
            "cheapest fare for a {foot} to {port2}",
            "no vehicle, just {n} {foot}s, what's the price",
            "walk-on return {port}, what's the damage",
            "{price} {n} adults on foot to {port2}",
            "how much is a {foot} ticket to {port} on {day}",
            "{foot} fare for the {time} please",
            "what's the walk on price to {port2}",
            "{price} walking on with {n} kids",
        ),
        hard=(
            "leaving the car at home, how much to go across",
            "how much is it without the {vehicle}",
            "not bringing the {vehicle} this time, price for {n} of us",
            "I don't drive, what's the fare",
            "my car's booked separately, how much is just a passenger ticket for my friend",
            "how much for a foot passenger who has a {pet} with them",
            "what would {n} adults pay if the {vehicle} stays behind",
        ),
    ),
    "pets_on_board": IntentPool(
        train=(
            "how much to bring a {pet}, is there a charge",
            "not an assistance dog, can my {pet} come in the lounge",
            "{askyou} tell me if my {pet} is {allowed}",
            "is a {pet} {allowed} on the {ferry} to {port}",
            "we're bringing a {pet}, any rules {onboard}",
            "where can a {pet} stay {onboard}",
            "can {pet}s go inside or do they stay in the car",
            "do you allow {pet}s in the lounge",
            "what's the policy for {pet}s {onboard}",
            "{ask} bring a {pet} to {port}",
            "my {pet} is coming, is that {allowed}",
            "can I bring my {pet} on the {ferry}",
            "are animals {allowed} {onboard}",
            "rules for animals on the {ferry}",
            "can my {pet} come up on deck",
            "where does my {pet} go during the crossing",
            "are dogs {allowed} {onboard}",
            "does my {pet} have to stay in the car",
            "is there a pet area {onboard}",
            "can my {pet} come in the lounge",
            "pet policy please",
            "do I need to book for my {pet}",
            "is there a charge for dogs",
            "can my {pet} travel with a foot passenger",
            "are cats {allowed} in the cabin",
            "where can my dog go during the crossing",
            "do dogs need to be on a lead",
            "are pets {allowed} on the {time} {ferry}?",
            "travelling with {n} dogs, any rules",
            "can my {pet} stay in the car for the crossing",
            "do you have pet friendly cabins",
            "is water available for dogs {onboard}",
            "my dog is huge, can it travel",
            "is my {pet} {allowed} {onboard}",
            "{ask} take my {pet} {onboard}",
            "will the crew let my {pet} up on deck",
            "what are the rules on animals on the boat",
            "bringing our four-legged friend, anything I need to know",
            "can a {pet} ride in a carrier on my lap",
            "Are animals welcome in the passenger areas?",
            "is my {pet} ok to come along to {port}",
        ),
        held_out=(
            "we're travelling with our {pet}, is that {allowed}",
            "do you let a {pet} into the lounge {onboard}",
            "my {pet} gets seasick, where can it stay during the crossing",
            "any rules for bringing a {pet} to {port}",
            "where does the dog sit on the crossing",
            "is my {pet} {allowed} on the {time}",
            "can I take a {pet} {onboard} to {port2}",
            "{ask} bring our {pet} {onboard}",
            "are pets {allowed} in the lounge {onboard}",
            "what are the rules for a {pet} {onboard}",
        ),
        hard=(
            "how much is it to bring my {pet}, or is it free",
            "not a guide dog, just my normal {pet}, can it come inside",
            "I've booked the {time}, can my {pet} come too",
            "can the {pet} come if I'm walking on",
            "can my {pet} stay in the {vehicle} or does it have to come up",
        ),
    ),
    "luggage_allowance": IntentPool(
        train=(
            "not lost anything, what's the {luggage} {limit}",
            "walking on with a {bag}, is there a {limit}",
            "{askyou} tell me the {luggage} {limit}",
            "{ask} bring a {bag} on the {ferry}",
            "is there a {limit} on {luggage} per person",
            "how many {luggage} can a {foot} take",
            "is a {bag} {allowed} as {luggage}",
            "do you charge for a {bag}",
            "what's the {limit} for {luggage} if I walk on",
            "where can I leave a {bag} {onboard}",
            "we have {n} {luggage} and a {bag}, is that ok",
            "how much {luggage} can I take",
            "how many {luggage} per person",
            "where do I put my {luggage} during the crossing",
            "is a {bag} too big to bring {onboard}",
            "is there a {luggage} {limit} for foot passengers",
            "can I bring a {bag}",
            "{luggage} {limit} please",
            "do I have to pay for extra {luggage}",
            "can I take a {bag} on as a foot passenger",
            "is there somewhere to store {luggage} {onboard}",
            "how many suitcases can I bring",
            "{limit} for {luggage}",
            "Could you clarify the {luggage} {limit} for the {time} sailing?",
            "can i bring my {bag} {onboard}",
            "are there luggage trolleys at {port}",
            "max bag size?",
            "do you have a left luggage at the terminal",
            "can i leave my {luggage} in the car during the crossing",
            "bringing a {bag}, is that ok",
            "what's the {luggage} {limit}",
            "is a {bag} {allowed} {onboard}",
            "any restrictions on how much gear I carry on",
            "will my {bag} be a problem on the boat",
            "is there a cap on the number of cases per person",
            "What are the rules regarding hand baggage?",
            "where do I stow my bits and pieces during the crossing",
        ),
        held_out=(
            "we have a {bag} and {n} {luggage}, is that within the {limit}",
            "is there a {limit} on {luggage} if I walk on",
            "what {luggage} can a {foot} bring",
            "is a {bag} counted in the {luggage} {limit}",
            "can i haul a {bag} over to {port}",
            "how much {luggage} can a {foot} bring",
            "is there a {limit} for {luggage} on the {ferry}",
            "{ask} bring a {bag} and {luggage}",
            "what's the {limit} on {luggage} per person",
            "can I take a {bag} {onboard} to {port}",
        ),
        hard=(
            "walking on with two big cases, is there a limit",
            "do I pay extra for a {bag} or is it included",
            "not lost, just want to know how many bags I can take",
            "can my {bag} stay in the {vehicle}",
            "booked the {time}, can I bring a {bag} with me",
        ),
    ),
    "accessibility_help": IntentPool(
        train=(
            "I need {assist} with my {luggage}, I use {mobility}",
            "it's my guide dog, can it come {onboard}",
            "{askyou} arrange {assist} for my {family}, they use {mobility}",
            "I'm {condition}, {ask} get {assist} on the {time}",
            "is there {access} for passengers with {mobility}",
            "my {family} is {condition}, what {assist} is there",
            "{ask} book {assist} at {port}",
            "does the {ferry} have {access}",
            "we need {assist} for someone with {mobility}",
            "travelling with my {family} who is {condition}, any {assist}",
            "I use {mobility}, is the {ferry} accessible",
            "I'm {condition}, what {assist} can you give on the {ferry}",
            "my {family} is {condition}, can you help {onboard}",
            "my {family} can't manage stairs, is there {access}",
            "is there a quiet area for {condition} passengers",
            "how are announcements made for {condition} passengers",
            "can I get to the upper decks without stairs",
            "my {family} uses {mobility}, will someone meet us at the terminal",
            "do you have {access} {onboard}",
            "I need {assist} boarding",
            "is there {access} at {port}",
            "can I bring {mobility}",
            "are there accessible toilets on the boat",
            "my mother needs {assist} getting on the {ferry}",
            "do you offer {assist} for disabled passengers",
            "is there a hearing loop",
            "{ask} book {assist} for the {time}",
            "I'm partially sighted, can someone help me",
            "can my guide dog travel with me",
            "are there disabled parking spaces at the terminal",
            "Could you arrange wheelchair {assist} for my journey on {date}?",
            "is there a ramp for wheelchairs",
            "can I stay in my car, I have limited mobility",
            "do you have accessible cabins",
            "I have {mobility}, how do I board",
            "travelling with {mobility}, is there {access}",
            "I have {mobility}, can I get {assist}",
            "my dad struggles with stairs, how does he get up to the lounge",
            "can you meet me at the gangway, I'm blind",
            "Are the passenger decks reachable without steps?",
            "need a hand getting {mobility} aboard at {port}",
            "I'm deaf, how will I hear announcements",
            "support for travellers with reduced mobility?",
        ),
        held_out=(
            "my {family} has {mobility}, can you give {assist} at {port}",
            "I'm {condition}, is there {access} {onboard}",
            "travelling on the {time} with {mobility}, what {assist} is there",
            "is {access} available at the {port} terminal",
            "my son is autistic, is there a quiet space",
            "{ask} get {assist} at {port}, I have {mobility}",
            "is there {access} on the {ferry} to {port2}",
            "my {family} has {mobility}, is there {assist} {onboard}",
            "I'm {condition}, {ask} book {assist}",
            "does {port} have {access}",
        ),
        hard=(
            "I'm in a wheelchair, can someone help with my bags",
            "can my assistance dog come into the lounge with me",
            "I'm booked on the {time}, I need help boarding with my crutches",
            "not asking about price, is the {port} terminal step free",
            "can I bring my mobility scooter or does it count as a vehicle",
        ),
    ),
    "lost_property": IntentPool(
        train=(
            "not a {luggage} question, I {lost} my {bag} {onboard}",
            "my {pet}'s collar was {lost} {onboard}",
            "{askyou} check if my {item} was {found}",
            "I {lost} my {item} on the {time} from {port}",
            "my {family} {lost} a {item} on the {ferry}",
            "has a {item} been {found} {onboard}",
            "{lost} my {item} somewhere on the {ferry}",
            "is my {item} in lost property",
            "we {lost} a {item} on {day}'s {ferry}",
            "who has my {item}, I {lost} it {onboard}",
            "I {lost} my {item} on the {ferry}",
            "{lost} my belongings {onboard}",
            "got off the {ferry} without my {item}",
            "what happens to belongings left {onboard}",
            "I {lost} my {bag} on the {ferry}, has it been {found}",
            "{lost} my {item} on the {time} sailing",
            "has anyone {found} a {item}",
            "I think I {lost} my {item} {onboard}",
            "lost property please",
            "how do I get back my {item} I left on the boat",
            "{lost} a {item} in the lounge",
            "my {item} is missing since the crossing to {port}",
            "who do I contact about lost items",
            "Could you check whether a {item} was {found} on the {date} sailing?",
            "forgot my {item} on the {ferry} yesterday",
            "is there a lost and found at {port}",
            "my kid {lost} his {item} on the boat",
            "did the crew find a {item}",
            "{lost} a {item} on the {port} boat",
            "was a {item} {found} after the {time}",
            "I've mislaid my {item} somewhere on deck",
            "think my {item} got left behind on the seats",
            "anything turned up matching a {item}",
            "Has a {item} been recovered following the {time} crossing?",
            "I came off the boat without my {item}",
        ),
        held_out=(
            "my {family} {lost} a {item} {onboard} on {day}",
            "I believe my {item} is still on the {ferry} from {port}",
            "was a {item} {found} on the {date} {ferry} to {port}",
            "{lost} my {item}, the {time} from {port}, any luck",
            "where do forgotten belongings end up",
            "I {lost} my {item} on the {time} {ferry}",
            "has a {item} been {found} on the {ferry} from {port}",
            "my {item} was {lost} {onboard} on {date}",
            "{ask} find my {item}, I {lost} it {onboard}",
            "is there a {item} in lost property from the {time}",
        ),
        hard=(
            "not asking about luggage rules, I actually left my {bag} on the ferry",
            "my {pet}'s lead went missing on the {time}",
            "forgot my {item} on the {time}, I'm back on the {date} crossing",
            "I left my {item} on the car deck, can I go back down for it",
            "no refund needed, I just want my {item} back from the boat",
        ),
    ),
    "food_on_board": IntentPool(
        train=(
            "not asking about {sched}, is the cafe open on the {time}",
            "how much is {food} {onboard}",
            "{askyou} tell me if there's {eat} {onboard}",
            "is there {eat} on the {time}",
            "can we buy {food} {onboard}",
            "what {eat} is there on the {ferry}",
            "do you have {food} on the {ferry} to {port}",
            "is the cafe open {onboard}",
            "will there be {eat} on the crossing",
            "are there {food} options {onboard}",
            "is there {eat} {onboard}",
            "where can I eat {onboard}",
            "what's on the menu in the cafe",
            "can we get a bite to eat {onboard}",
            "is the cafe serving {food} on the {time}",
            "do you serve {food} {onboard}",
            "is the cafe open on the {time}",
            "can I buy {food} on the boat",
            "what food is available {onboard}",
            "is there a bar on the {ferry}",
            "do you cater for allergies",
            "can I bring my own food",
            "is the restaurant open on the early sailing",
            "Could you tell me whether {food} is served on the {time} crossing?",
            "any vegetarian food {onboard}",
            "do you have a kids menu",
            "can i get a coffee on the boat",
            "what time does the cafe close",
            "is there {food} on the {port} ferry",
            "do you sell snacks",
            "can I get {eat} {onboard}",
            "do you sell {food} {onboard}",
            "will I be able to grab a bite during the crossing",
            "is there anywhere to eat on the vessel",
            "are drinks sold aboard the {time}",
            "Is there catering provision for {food}?",
            "peckish, is the galley open",
        ),
        held_out=(
            "is {eat} available on the {ferry} to {port}",
            "I'd like {food} during the crossing, is there any",
            "does the {time} have {eat}",
            "what kind of {eat} can we get {onboard}",
            "what's on the menu on board",
            "is there {food} on the {time}",
            "{ask} buy {eat} {onboard}",
            "what {eat} is available on the {ferry} to {port}",
            "does the {ferry} serve {food}",
            "is there {eat} on the {ferry} on {day}",
        ),
        hard=(
            "not asking about the crossing time, is the cafe open on the {time}",
            "do you do {food} on board or should I pack lunch for {n} kids",
            "my daughter has a nut allergy, is the food on board safe",
            "how much is a coffee on the boat",
            "is the bar still open if the {time} is running late",
        ),
    ),
    "speak_to_agent": IntentPool(
        train=(
            "I've tried to {change} my {booking} online, let me {talk} a {human}",
            "about my {refund}, I want to {talk} a {human}",
            "{askyou} put me through to a {human}",
            "{ask} {talk} a {human} please",
            "get me a {human}",
            "I'd like to {talk} a {human} about my {booking}",
            "is there a {human} free",
            "connect me with a {human}",
            "I need a {human}, not a bot",
            "can a {human} call me about {ref}",
            "{ask} {talk} a {human}",
            "can this be escalated to a {human}",
            "is there a live {human} available",
            "I'd rather {talk} a {human} than a bot",
            "no more automated answers, I want a {human}",
            "I want to {talk} a {human}",
            "put me through to an agent",
            "real person please",
            "how do I call you",
            "can someone call me back",
            "this bot is useless, get me a {human}",
            "I need to {talk} customer service",
            "what's your phone number",
            "Could I please {talk} a member of staff?",
            "agent",
            "{talk} someone",
            "is there a {human} I can chat to",
            "transfer me to a real person",
            "i want to make a complaint to a manager",
            "{ask} {talk} someone about booking {ref}",
            "{human} please",
            "let me {talk} a {human}",
            "get me someone with a pulse",
            "I'd rather deal with an actual employee",
            "is anyone from your team available to chat live",
            "escalate this please",
            "I would appreciate speaking with a representative.",
        ),
        held_out=(
            "I'd like to {talk} a {human} about {ref}",
            "please connect me with a {human}",
            "is a {human} free to help me",
            "need a {human}, not a chatbot",
            "stop the automated replies, I need staff",
            "{ask} {talk} a {human} now",
            "please let me {talk} a {human} about {ref}",
            "I need to {talk} a {human}",
            "can you get a {human} to call me",
            "I want a {human}, please",
        ),
        hard=(
            "I've tried to change my booking three times, just let me talk to someone",
            "my refund is late and I want to speak to a person about it",
            "don't give me the timetable, I want a human",
            "can a member of staff phone me about the {time} cancellation",
            "not a bot question, put me through to the {port} office",
        ),
    ),
    "greeting": IntentPool(
        train=(
            "{greet}, is anyone around",
            "{greet}, are you a bot",
            "{greet}, nice to meet you",
            "{greet} {crew}, hope all is well",
            "{greet}, how's it going",
            "{greet} again",
            "{greet}, good to talk to you",
            "just wanted to say {greet}",
            "{greet}, you there?",
            "{greet} {crew}, how's your day",
            "{greet} {crew}, just popping in",
            "{greet}, anyone about?",
            "{greet}, lovely to chat",
            "{greet} to the {crew}",
            "{greet}, hope you're having a good day",
            "{greet}, I'll ask my question in a sec",
            "{greet} {crew}, thanks for last time",
            "{greet}",
            "{greet} {crew}",
            "{greet}, anyone there",
            "{greet}, how are you",
            "{greet} {crew}, how are you today",
            "{greet}! is this the chat?",
            "{greet} {crew}, hope you're well",
            "{greet}, just saying hi",
            "{greet} {greet2}",
        ),
        held_out=(
            "{greet}, is this thing on",
            "{greet}, anybody home?",
            "{greet} to you, {crew}",
            "well {greet} {crew}",
            "{greet}, nice to chat",
        ),
        hard=(
            "{greet}, I'll have a question in a minute",
            "{greet}, thanks for the quick reply last time",
            "{greet}, not a booking question, just saying hello",
            "{greet} {crew}, lovely crossing yesterday",
        ),
    ),
    "loyalty_points": IntentPool(
        train=(
            "not about a {refund}, my {points} are missing",
            "can I pay for the {vehicle} with {points}",
            "do I keep my {points} if I {cancel}",
            "{askyou} tell me my {points}",
            "{ask} check my {points}",
            "how do I collect {points}",
            "do I get {points} for the {time} crossing",
            "my {points} are wrong for {ref}",
            "{ask} use {points} for a {booking}",
            "when do my {points} expire",
            "are {points} added after every crossing",
            "how many {points} do I have",
            "my membership number is {ref}, how many {points} do I have",
            "do regular travellers get {points}",
            "do members get a discount on crossings",
            "is there a reward for travelling with you often",
            "check my {points} balance",
            "how do I join Tidewren Rewards",
            "can I use my {points} to pay for a crossing",
            "my {points} from the {date} trip are missing",
            "how many {points} do I earn per crossing",
            "do Wrenpoints expire",
            "Could you tell me my rewards balance?",
            "how do I redeem {points}",
            "loyalty card not working",
            "add my {points} for booking {ref}",
            "what can I spend my {points} on",
            "is there a frequent traveller scheme",
            "I forgot to scan my rewards card",
            "how many {points} for a free trip",
            "{ask} use {points} on the {time}",
            "{points} balance please",
            "what's my tally on the rewards scheme",
            "do I get anything for travelling often",
            "Can accrued rewards be put towards a vehicle fare?",
            "my membership number is {ref}, balance please",
            "points didn't credit after my last crossing",
        ),
        held_out=(
            "do I earn {points} on the {time} crossing",
            "my {points} look wrong after booking {ref}",
            "how do I spend {points} on a {booking}",
            "can {points} pay for a {foot} ticket",
            "I'm a regular, is there a member discount",
            "how many {points} have I got",
            "{ask} see my {points} balance",
            "do I get {points} on {ref}",
            "can I spend {points} on the {time}",
            "my {points} haven't been added for {date}",
        ),
        hard=(
            "not a refund question, my Wrenpoints never showed up for {ref}",
            "can I pay for the {vehicle} fare using points",
            "I cancelled a trip, do I lose the points I earned",
            "can I book the {time} with my points",
            "are Wrenpoints earned on foot passenger tickets too",
        ),
    ),
}

# ---------------------------------------------------------------------------------------
# Register and noise. Training and eval use partly different openers and sign-offs.
# ---------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Style:
    """How a split decorates and corrupts a filled template."""

    openers: tuple[str, ...]
    closers: tuple[str, ...]
    opener_rate: float
    closer_rate: float
    contexts: tuple[str, ...]
    context_rate: float
    typo_rate: float
    lower_rate: float


TRAIN_STYLE = Style(
    openers=(
        "hi",
        "hello",
        "hey",
        "hiya",
        "good morning",
        "hello,",
        "Hi there,",
        "quick question:",
        "um",
        "Dear Tidewren team,",
        "Good afternoon.",
        "excuse me,",
        "ok so",
        "right,",
        "so",
        "Hello Tidewren,",
        "evening,",
        "sorry,",
        "hey quick one",
        "yes hi,",
    ),
    closers=(
        "thanks",
        "cheers",
        "pls",
        "please",
        "thank you",
        "ta",
        "thanks in advance",
        "Many thanks.",
        "asap",
        "?",
        "!!",
        "thx",
        "ty",
        "Kind regards.",
        "much appreciated",
    ),
    opener_rate=0.35,
    closer_rate=0.3,
    contexts=(
        "first time using this chat",
        "we're a family of {n}",
        "sorry if this is a silly question",
        "I'm on my phone",
        "we travel on {date}",
        "quick one",
        "just wondering",
        "I've looked on the website",
        "going over to see family",
        "my name is Sam",
        "sorry for the typos",
        "it's for my holiday",
        "I couldn't find it online",
        "we're visiting friends",
        "it's a work trip",
        "I'm new to the area",
    ),
    context_rate=0.3,
    typo_rate=0.25,
    lower_rate=0.4,
)

EVAL_STYLE = Style(
    openers=(
        "hi",
        "hello",
        "evening all,",
        "Hello Tidewren,",
        "right,",
        "sorry to bother you but",
        "hey quick one",
        "so",
        "good morning",
        "Dear Tidewren team,",
        "excuse me,",
    ),
    closers=(
        "thanks",
        "much appreciated",
        "cheers",
        "Kind regards.",
        "ty",
        "pls",
        "thx",
        "?",
        "thank you",
    ),
    opener_rate=0.3,
    closer_rate=0.3,
    contexts=(
        "first time using this chat",
        "we're a family of {n}",
        "just wondering",
        "we're visiting relatives",
        "I've looked on the website",
        "I'm new to the islands",
        "it's a work trip",
        "sorry for the long message",
    ),
    context_rate=0.15,
    typo_rate=0.25,
    lower_rate=0.45,
)

KEYBOARD_NEIGHBOURS: dict[str, str] = {
    "a": "qsz",
    "b": "vgn",
    "c": "xdv",
    "d": "sfe",
    "e": "wrd",
    "f": "dgr",
    "g": "fht",
    "h": "gjy",
    "i": "uok",
    "j": "hku",
    "k": "jli",
    "l": "ko",
    "m": "n",
    "n": "bm",
    "o": "ipl",
    "p": "o",
    "q": "wa",
    "r": "etf",
    "s": "adw",
    "t": "ryg",
    "u": "yij",
    "v": "cb",
    "w": "qes",
    "x": "zc",
    "y": "tu",
    "z": "x",
}

SLOT_PATTERN = re.compile(r"\{([a-z]+)(\d?)\}")


def pick_slot_value(
    rng: random.Random, name: str, rare: Mapping[str, Sequence[str]], rare_rate: float
) -> str:
    """Draw one value for slot ``name``, sometimes from the rare pool when one is given."""
    if name in rare and rng.random() < rare_rate:
        return rng.choice(rare[name])
    return rng.choice(SLOTS[name])


def fill_template(
    template: str, rng: random.Random, rare: Mapping[str, Sequence[str]], rare_rate: float
) -> str:
    """Replace every ``{slot}`` / ``{slot2}`` in ``template``; numbered slots differ.

    Slot values may contain slots themselves (``booking {ref}``), so filling repeats until
    none is left.
    """
    chosen: dict[str, str] = {}

    def replace(match: re.Match[str]) -> str:
        key = match.group(0)
        if key not in chosen:
            taken = {v for k, v in chosen.items() if k.startswith("{" + match.group(1))}
            value = pick_slot_value(rng, match.group(1), rare, rare_rate)
            for _ in range(20):
                if value not in taken:
                    break
                value = pick_slot_value(rng, match.group(1), rare, rare_rate)
            chosen[key] = value
        return chosen[key]

    text = template
    for _ in range(3):
        text = SLOT_PATTERN.sub(replace, text)
    if SLOT_PATTERN.search(text):
        raise ValueError(f"unfilled slot in {template!r}")
    return text


def corrupt_word(word: str, rng: random.Random) -> str:
    """Apply one keyboard-style typo (swap, drop, double or neighbour key) to ``word``."""
    i = rng.randrange(1, len(word) - 1)
    kind = rng.randrange(4)
    if kind == 0:
        return word[:i] + word[i + 1] + word[i] + word[i + 2 :]
    if kind == 1:
        return word[:i] + word[i + 1 :]
    if kind == 2:
        return word[:i] + word[i] + word[i:]
    neighbours = KEYBOARD_NEIGHBOURS.get(word[i].lower(), word[i])
    return word[:i] + rng.choice(neighbours) + word[i + 1 :]


def add_typos(text: str, rng: random.Random) -> str:
    """Corrupt one or two alphabetic words of four letters or more."""
    words = text.split(" ")
    candidates = [i for i, w in enumerate(words) if len(w) >= 4 and w.isalpha()]
    if not candidates:
        return text
    for i in rng.sample(candidates, k=min(len(candidates), rng.choice((1, 1, 2)))):
        words[i] = corrupt_word(words[i], rng)
    return " ".join(words)


def decorate(text: str, rng: random.Random, style: Style) -> str:
    """Add register: small talk, an opener, a sign-off, casing changes and typos."""
    if rng.random() < style.context_rate:
        context = fill_template(rng.choice(style.contexts), rng, {}, 0.0)
        text = f"{context}, {text}" if rng.random() < 0.5 else f"{text}. {context}"
    if rng.random() < style.opener_rate:
        text = f"{rng.choice(style.openers)} {text}"
    if rng.random() < style.closer_rate:
        closer = rng.choice(style.closers)
        text = text + closer if closer in {"?", "!!"} else f"{text} {closer}"
    if rng.random() < style.typo_rate:
        text = add_typos(text, rng)
    if rng.random() < style.lower_rate:
        text = text.lower()
    return re.sub(r"\s+", " ", text).strip()


def normalise(text: str) -> str:
    """Lower-case, drop punctuation and squeeze spaces; used to keep the splits apart."""
    return re.sub(r"\s+", " ", re.sub(r"[^\w\s]", " ", text.lower())).strip()


def sample_utterances(
    templates: Sequence[str],
    count: int,
    rng: random.Random,
    style: Style,
    rare: Mapping[str, Sequence[str]],
    banned: set[str],
) -> list[str]:
    """Draw ``count`` distinct utterances whose normalised form is not in ``banned``.

    Templates are cycled in shuffled rounds so that every phrasing is used before any is
    repeated. The normalised form of each accepted text is added to ``banned``.
    """
    out: list[str] = []
    order: list[str] = []
    for _ in range(count * 200):
        if len(out) == count:
            return out
        if not order:
            order = list(templates)
            rng.shuffle(order)
        text = decorate(fill_template(order.pop(), rng, rare, EVAL_RARE_SLOT_RATE), rng, style)
        key = normalise(text)
        if key and key not in banned:
            banned.add(key)
            out.append(text)
    raise RuntimeError(f"could not draw {count} distinct utterances from {templates[:2]}...")


def build_train(rng: random.Random, banned: set[str]) -> list[tuple[str, str]]:
    """Build the training rows from the training template pools."""
    rows: list[tuple[str, str]] = []
    for label in LABELS:
        count = TRAIN_ROWS_GREETING if label == "greeting" else TRAIN_ROWS
        texts = sample_utterances(POOLS[label].train, count, rng, TRAIN_STYLE, {}, banned)
        rows.extend((text, label) for text in texts)
    return rows


def build_eval(rng: random.Random, banned: set[str]) -> list[tuple[str, str]]:
    """Build the eval rows: held-out paraphrases plus the hard pool, rare words included."""
    rows: list[tuple[str, str]] = []
    for label in LABELS:
        greeting = label == "greeting"
        counts = (
            (POOLS[label].held_out, EVAL_HELD_OUT_ROWS_GREETING if greeting else EVAL_HELD_OUT_ROWS),
            (POOLS[label].hard, EVAL_HARD_ROWS_GREETING if greeting else EVAL_HARD_ROWS),
        )
        for templates, count in counts:
            texts = sample_utterances(templates, count, rng, EVAL_STYLE, EVAL_ONLY_SLOTS, banned)
            rows.extend((text, label) for text in texts)
    return rows


def write_csv(rows: Iterable[tuple[str, str]], path: Path) -> int:
    """Write ``rows`` as a ``text,label`` CSV and return the number of rows written."""
    path.parent.mkdir(parents=True, exist_ok=True)
    count = 0
    with path.open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(("text", "label"))
        for row in rows:
            writer.writerow(row)
            count += 1
    return count


def check_pools() -> None:
    """Fail fast if a template pool is missing or the train and eval pools overlap."""
    missing = set(LABELS) ^ set(POOLS)
    if missing:
        raise ValueError(f"template pools and labels disagree: {sorted(missing)}")
    for label, pool in POOLS.items():
        overlap = set(pool.train) & (set(pool.held_out) | set(pool.hard))
        if overlap:
            raise ValueError(f"{label}: templates shared between train and eval: {overlap}")


def generate(seed: int, out_dir: Path) -> tuple[int, int]:
    """Generate both splits into ``out_dir``; return (train rows, eval rows)."""
    check_pools()
    banned: set[str] = set()
    train_rows = build_train(random.Random(seed), banned)
    eval_rows = build_eval(random.Random(seed + 1), banned)
    random.Random(seed + 2).shuffle(train_rows)
    random.Random(seed + 3).shuffle(eval_rows)
    return write_csv(train_rows, out_dir / TRAIN_FILE), write_csv(eval_rows, out_dir / EVAL_FILE)


def main(argv: Sequence[str] | None = None) -> None:
    """Command-line entry point."""
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--seed", type=int, default=SEED, help="random seed (default: %(default)s)")
    parser.add_argument("--out-dir", type=Path, default=DEFAULT_OUT_DIR, help="output folder")
    args = parser.parse_args(argv)
    n_train, n_eval = generate(args.seed, args.out_dir)
    print(f"wrote {n_train} training rows and {n_eval} eval rows to {args.out_dir}")


if __name__ == "__main__":
    main()
