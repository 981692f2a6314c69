"""pandas baseline for 16_regex_forms: a vectorised regular-expression match, group and count."""


def run(layers):
    t = layers.read("word", ["form", "upos"])
    hit = t.form.str.contains(r"^[a-z]+(?:ed|ing)$", regex=True, na=False)
    return t[hit].groupby("upos", dropna=False).size().reset_index()
