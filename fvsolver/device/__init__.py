"""The device: wet cap, vapour space, condensation sink, second bulb and the target."""
