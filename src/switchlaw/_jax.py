"""JAX, imported on demand and always in float64 (set here, in the package, not in tests)."""


def jax_float64():
    """Return ``(jax, jax.numpy)`` with 64-bit floats enabled."""
    import jax

    jax.config.update("jax_enable_x64", True)
    import jax.numpy as jnp

    return jax, jnp
