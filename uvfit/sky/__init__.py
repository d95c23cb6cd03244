"""The sky model layer. Importing the package loads ``modelfile``, which gives ``SkyModel`` its
file conveniences (``SkyModel.build``, ``model.to_toml()``, ``model.save(path)``)."""

from . import modelfile  # noqa: F401
