"""Model files of invented sources for the tests: TOML text built from a few numbers.

Nothing here is a reference: each test still names the source its checks compare against.
"""

#: a position held at the phase centre
CENTRE = "{ value = 0.0, fixed = true }"


def component(name, flux, shape="gaussian", east=CENTRE, north=CENTRE, **sizes):
    """One ``[[component]]`` table; values are written as Python prints them, strings as given."""
    lines = [
        "[[component]]",
        f'name = "{name}"',
        f'shape = "{shape}"',
        f"flux = {flux}",
        f"east = {east}",
        f"north = {north}",
    ]
    lines += [f"{key} = {value}" for key, value in sizes.items()]
    return "\n".join(lines) + "\n"


def model_toml(*components, unit="uas", description=None, gap=""):
    """A whole model file: the header, then the components (``gap`` between the blocks)."""
    head = f'angular_unit = "{unit}"\n'
    if description is not None:
        head += f'description = "{description}"\n'
    return gap.join([head, *components])
