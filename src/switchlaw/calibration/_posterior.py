"""An optional Bayesian posterior of the free parameters, drawn by NumPyro's NUTS sampler."""

from __future__ import annotations

import numpy as np

from .._errors import InputError
from .._jax import jax_float64


def sample_posterior(problem, theta, bounds, draws: int, seed) -> dict:
    """``draws`` posterior draws per free parameter (uniform priors on the bounds).

    The likelihood is the fit's own (numpy, with its exact gradient), handed to NumPyro's
    No-U-Turn sampler (Hoffman & Gelman 2014) through ``jax.pure_callback`` with a custom
    vector-Jacobian product; ``draws`` warm-up steps precede the kept draws; one chain.
    """
    try:
        import numpyro
        import numpyro.distributions as dist
        from numpyro.infer import MCMC, NUTS, init_to_value
    except ImportError:  # pragma: no cover - depends on the installation
        raise InputError("`posterior` needs NumPyro: pip install 'switchlaw[bayes]'") from None
    jax, jnp = jax_float64()
    names = problem.names
    k = len(names)
    shapes = (jax.ShapeDtypeStruct((), jnp.float64), jax.ShapeDtypeStruct((k,), jnp.float64))

    def host(values):
        value, grad = problem.log_likelihood(np.asarray(values, dtype=float), with_gradient=True)
        if not np.isfinite(value):
            return np.float64(-np.inf), np.zeros(k)
        return np.float64(value), np.asarray(grad, dtype=np.float64)

    @jax.custom_vjp
    def log_likelihood(values):
        return jax.pure_callback(host, shapes, values)[0]

    def forward(values):
        value, grad = jax.pure_callback(host, shapes, values)
        return value, grad

    def backward(grad, cotangent):
        return (cotangent * grad,)

    log_likelihood.defvjp(forward, backward)

    def model():
        values = jnp.stack([numpyro.sample(name, dist.Uniform(lo, hi)) for name, (lo, hi) in zip(names, bounds)])
        numpyro.factor("log_likelihood", log_likelihood(values))

    # Start at the estimate, nudged inside bounds it may sit on.
    start = {name: float(np.clip(t, lo + 1e-6 * (hi - lo), hi - 1e-6 * (hi - lo)))
             for name, t, (lo, hi) in zip(names, theta, bounds)}
    if isinstance(seed, np.random.Generator):
        seed = int(seed.integers(2**31))
    key = jax.random.PRNGKey(int(seed) if seed is not None else 0)
    mcmc = MCMC(NUTS(model, init_strategy=init_to_value(values=start)), num_warmup=draws,
                num_samples=draws, num_chains=1, progress_bar=False)
    mcmc.run(key)
    samples = mcmc.get_samples()
    return {name: np.asarray(samples[name], dtype=float) for name in names}
