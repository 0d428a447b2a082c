"""Physics stage: hit probabilities p[i, j, l] of every emitter-receiver pair and slot.

``lone`` (closed forms, one sphere alone), ``shadowed`` (absorbing spheres that shadow each other; Laplace-domain
renewal model), ``particles`` (Brownian simulation of the whole layout), all returning the same
``ChannelResponse`` through ``response.channel_response``."""
