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


# -- what masking must catch now (issue list) and what it must leave alone ------------------------------------
# Invented numbers; identity-number check algorithms are checked against python-stdnum (a reference library)
# below. Formats: UK National Insurance number (HMRC: two letters, six digits, A-D; from memory), US SSN
# (3-2-4 digits, no 000/666/9xx area), German tax id (11 digits, ISO 7064 MOD 11,10), French NIR (13 digits and
# a 97-modulus key), Spanish DNI/NIE (check letter modulo 23), Dutch BSN (11-test), Luhn (ISO/IEC 7812-1),
# IBAN (ISO 13616 mod 97), UK postcode shape (Royal Mail; from memory), US ZIP+4.
import random  # noqa: E402

from stdnum import iban as std_iban  # noqa: E402
from stdnum import luhn as std_luhn  # noqa: E402
from stdnum.de import idnr as std_idnr  # noqa: E402
from stdnum.es import dni as std_dni  # noqa: E402
from stdnum.es import nie as std_nie  # noqa: E402
from stdnum.fr import nir as std_nir  # noqa: E402
from stdnum.iso7064 import mod_11_10 as std_mod_11_10  # noqa: E402
from stdnum.nl import bsn as std_bsn  # noqa: E402

from opencode.files.masking import (  # noqa: E402
    de_tax_id_valid, es_dni_valid, fr_nir_valid, iban_valid, luhn_valid, nl_bsn_valid)


@pytest.mark.parametrize(("text", "expected"), [
    ("tel:07700 900123", "tel:[phone]"),
    ("phone:555-123-4567 anytime", "phone:[phone] anytime"),
    ("mob-07700900123", "mob-[phone]"),
    ("ring me(07700 900123)", "ring me[phone]"),
    ("no.07700 900123", "no.[phone]"),
    ("Tel.: 030/12345678", "Tel.: [phone]"),
    ("call 0161/496 0000 please", "call [phone] please"),
    ("see mysite.xyz/page for more", "see [url] for more"),
    ("josé@exemple.fr", "[email]"),
    ("write to renée.dupont@poste.example.fr", "write to [email]"),
    ("john[at]example.com", "[email]"),
    ("john (at) example (dot) com", "[email]"),
    ("john at example dot com", "[email]"),
    ("I live at SW1A 1AA.", "I live at [postcode]."),
    ("postcode m1 1ae", "postcode [postcode]"),
    ("ZIP 90210-1234", "ZIP [postcode]"),
    ("card 4111 1111 1111 1111 exp", "card [card] exp"),
    ("card 5500-0000-0000-0004", "card [card]"),
    ("pay to GB82 WEST 1234 5698 7654 32", "pay to [bank account]"),
    ("NI number AB 12 34 56 C", "NI number [id number]"),
    ("ssn 123-45-6789", "ssn [id number]"),
    ("Steuer-ID 86 095 742 719", "Steuer-ID [id number]"),
    ("NIR 1 85 05 78 006 084 91", "NIR [id number]"),
    ("DNI 12345678Z", "DNI [id number]"),
    ("NIE X-1234567-L", "NIE [id number]"),
    ("mijn BSN is 111222333", "mijn BSN is [id number]"),
])
def test_new_identifiers_are_masked(text, expected):
    assert mask_identifiers(text) == expected


@pytest.mark.parametrize("text", [
    "I am 67 and retired", "aged 45-54", "£12.50 a month", "$1,200 a year", "€3.50", "costs 1 250 euros",
    "in 2019", "from 2010 to 2015", "1998, 2004 and 2011", "1,000,000 people", "population 12 345 678",
    "3 or 4 times a week", "came 2nd", "on the M6 2nd junction", "rated 4.5/5", "the 11:45 bus", "room 101",
    "open 9-17", "12/05/2023", "about 25%", "4111 1111 1111 1112", "12345678A",
    "ZIP 90210", "no. 5 bus", "Chapter 11", "10/10 would visit", "1 in 5 people", "order 1234567",
])
def test_ordinary_words_and_numbers_are_left_alone(text):
    assert mask_identifiers(text) == text


def test_check_algorithms_agree_with_the_reference_library():
    # python-stdnum as the outside reference, on random numbers (valid and not) in each format.
    rng = random.Random(7)
    for _ in range(400):
        digits = "".join(rng.choice("0123456789") for _ in range(16))
        assert luhn_valid(digits) == std_luhn.is_valid(digits)
        tax = rng.choice("123456789") + "".join(rng.choice("0123456789") for _ in range(10))
        # the check digit is ISO 7064 MOD 11,10; python-stdnum's idnr adds a digit-frequency rule on top
        assert de_tax_id_valid(tax) == std_mod_11_10.is_valid(tax)
        if std_idnr.is_valid(tax):
            assert de_tax_id_valid(tax)
        bsn = "".join(rng.choice("0123456789") for _ in range(9))
        assert nl_bsn_valid(bsn) == std_bsn.is_valid(bsn)
        dni = "".join(rng.choice("0123456789") for _ in range(8)) + rng.choice("TRWAGMYFPDXBNJZSQVHLCKE")
        assert es_dni_valid("", dni[:8], dni[8]) == std_dni.is_valid(dni)
        nie = rng.choice("XYZ") + dni[1:]
        assert es_dni_valid(nie[0], nie[1:8], nie[8]) == std_nie.is_valid(nie)
        body = rng.choice("12") + "85" + rng.choice(["05", "11"]) + rng.choice(["78", "2A", "2B"]) + "006084"
        key = "%02d" % rng.randrange(1, 98)
        assert fr_nir_valid(body + key) == std_nir.is_valid(body + key)
    for number in ("GB82WEST12345698765432", "NL91ABNA0417164300", "DE89370400440532013000", "GB82WEST12345698765431"):
        assert iban_valid(number) == std_iban.is_valid(number)


def test_masking_a_verbatim_with_everything(tmp_path):
    text = ("Hi, I'm at B1 1AA, ring me on tel:07700 900123 or mail josé@example.com; "
            "my card 4111111111111111 got charged £12.50 twice in 2023, 3 times.")
    assert mask_identifiers(text) == ("Hi, I'm at [postcode], ring me on tel:[phone] or mail [email]; "
                                      "my card [card] got charged £12.50 twice in 2023, 3 times.")
