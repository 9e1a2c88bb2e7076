"""The rules by which a select table places a life whose age at selection is not whole.

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
