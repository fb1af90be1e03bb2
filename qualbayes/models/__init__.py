"""Statistical models. ``lots`` is closed form (scipy only); ``lot_history`` and ``life``
import jax and are loaded only when a sampler is needed."""
