"""Recipe text edits the end-to-end checks share."""


def without_verification(text):
    """The recipe less its [verification] and [master ...] sections: without
    a logged master verification the station gives every part NO VERDICT
    (verification due), so a check that compares verdicts needs them gone."""
    out, skip = [], False
    for line in text.splitlines():
        if line.startswith("["):
            skip = line.startswith("[verification]") or line.startswith("[master ")
        if not skip:
            out.append(line)
    return "\n".join(out) + "\n"
