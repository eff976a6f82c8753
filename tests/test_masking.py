"""Masking of e-mail addresses, phone numbers and web addresses in exported verbatims.

The examples are invented; the phone formats follow ITU-T E.164 (at most 15 digits with the country code)
and common national writing styles (common practice, no published source for the exact patterns).
"""

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from opencode.files.masking import mask_identifiers


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("mail me at ash.bryn+library@example.org please", "mail me at [email] please"),
        ("ASH_99@mail.example.co.uk", "[email]"),
        ("call 07700 900123 after six", "call [phone] after six"),
        ("ring +44 20 7946 0958 today", "ring [phone] today"),
        ("US office: +1 (555) 123-4567.", "US office: [phone]."),
        ("(020) 7946 0958", "[phone]"),
        ("desk 555-0199", "desk [phone]"),
        ("+33 6 12 34 56 78", "[phone]"),
        ("0049 30 1234567", "[phone]"),
        ("1-800-555-0199", "[phone]"),
        ("+4915112345678", "[phone]"),
        ("my mobile 0612345678.", "my mobile [phone]."),
        ("see https://wrenfield.example.com/hours?day=mon.", "see [url]."),
        ("www.wrenfield-library.org has the times", "[url] has the times"),
        ("visit wrenfield-library.org/hours now", "visit [url] now"),
        ("both: bryn@example.net and http://example.net/x", "both: [email] and [url]"),
    ],
)
def test_identifiers_are_masked(text, expected):
    assert mask_identifiers(text) == expected


@pytest.mark.parametrize(
    "text",
    [
        "since 1999",
        "in 2019 2020 and 2021",
        "between 2019-2021",
        "on 12/03/2024",
        "on 2024-03-12",
        "on 12.03.2024",
        "open 18:00-22:00",
        "22.00 closing is too late",
        "costs £1 250 000 a year",
        "1,250,000 books",
        "pi is 3.14159265",
        "open 9 to 5",
        "ages 18-24",
        "I visit 3-4 times a month",
        "rated 10/10",
        "postcode 12345",
        "version 1.2.3",
        "e.g. this, i.e. that",
        "about 20% more",
        "card number 1234567",
        "",
    ],
)
def test_dates_years_amounts_are_not_masked(text):
    assert mask_identifiers(text) == text


def test_masking_is_idempotent():
    text = "ash@example.org, +44 20 7946 0958, www.example.org"
    once = mask_identifiers(text)
    assert once == "[email], [phone], [url]"
    assert mask_identifiers(once) == once


@settings(max_examples=50, deadline=None)
@given(st.text(alphabet=st.sampled_from("abcdefghij klmnop,!?'ÄÖé"), max_size=80))
def test_text_without_digits_at_signs_or_dots_is_unchanged(text):
    assert mask_identifiers(text) == text
