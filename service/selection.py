"""The rules by which a select table places a life whose age at selection is not whole, and
the conventions by which an age is counted from a date of birth.

Kept free of numpy, so that the light client can describe them too."""

#: how a select table places a life whose age at selection (age − duration) is not whole
SELECTION_AGE_RULES = {
    "last-birthday": "selected at the whole age at or below age − duration (the age last "
    "birthday at selection); the life keeps its exact age, and its duration since selection "
    "becomes age − that whole age, longer by less than a year",
    "nearest-birthday": "selected at the whole age nearest to age − duration (halves round up); "
    "the life keeps its exact duration since selection and is valued at that whole age plus "
    "the duration, so its age moves by at most half a year",
}

#: how an age (or a duration) is counted from a date of birth (or of entry) to the calculation
#: date; "completed years" are the birthdays passed, a 29 February birthday falling on
#: 28 February in common years
AGE_CONVENTIONS = {
    "exact": "completed years plus the actual days since the last birthday over the actual "
    "days from the last birthday to the next: whole on a birthday, in [x, x + 1) between",
    "last-birthday": "completed years (the age at the last birthday)",
    "nearest-birthday": "completed years, plus 1 when at least half of the days from the last "
    "birthday to the next have passed (2 × days since ≥ days between)",
    "next-birthday": "completed years plus 1 (on a birthday too: the age at the next one)",
}
