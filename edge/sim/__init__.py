"""Plant simulator: a physics model of an invented boiler house (``plant``), its scenarios
(``scenarios``), served over Modbus TCP and OPC UA on loopback (``runner``), and the demo's
terminal view (``view``, ``show``)."""
