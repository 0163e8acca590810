"""Element families.

Every family is a module with batched kernels: the first axis of every array is
the element.  All quantities are SI (N, m, Pa, N/m).  Conventions shared by all
families, relied on by :mod:`cablefe.assembly`:

* Element nodal DOFs are ordered ``[node i DOFs, node j DOFs]``; a node carries
  ``[ux, uy, uz]`` (bar, cable) or ``[ux, uy, uz, rx, ry, rz]`` (beam).
* ``force`` is the internal force vector ``f_int``: the force each node exerts
  on the element.  Equilibrium at a free DOF reads ``sum f_int = f_ext``.  A
  taut straight tie of tension N from i to j with unit vector e has
  ``f_i = -N e`` and ``f_j = +N e``.  Loads an element carries inside itself
  (the catenary's distributed weight) appear in ``f_int``: for a catenary of
  total weight W, ``f_i + f_j = (0, 0, W)``.
* ``tangent`` is ``d force / d u`` of shape (n, k, k).  For rotational DOFs the
  increment is spatial: ``R_new = expm(skew(dtheta)) @ R_old``.
* Tension is positive.  z is up; weight acts in -z.
"""
