#!/usr/bin/python3
"""Generates the demo survey of Talvoria, an invented country (see README.md).

Every number comes from one random.Random(SEED) drawn in a fixed order, and
every file is written with fixed formatting, so running this script again
reproduces the committed files byte for byte. Standard library only.

Usage: /usr/bin/python3 data/demo/make_demo_data.py [output_folder]
(default: the folder holding this script).
"""

import csv
import math
import os
import random
import sys

SEED = 20240917

# ---------------------------------------------------------------------------
# Regions. Levels are relative to a national average of 1:
#   rent     housing rents          food     food and drink in shops
#   services local labour-intensive services
#   utility  water, power and heating (networks, distance, climate)
#   tourism  hotels and holiday lets
#   income   per-head consumption budget (drives expenditure and wages)
# ---------------------------------------------------------------------------
REGIONS = [
    # code, name, population, urban, rent, food, services, utility, tourism, income
    ("cap", "Aurelmont Capital Region", 3150000, True, 1.60, 1.12, 1.28, 1.04, 1.35, 1.38),
    ("har", "Harrowin Bay", 1080000, True, 1.32, 1.06, 1.14, 1.00, 1.18, 1.18),
    ("ost", "Ostrevale", 640000, True, 1.22, 1.03, 1.07, 0.98, 1.05, 1.08),
    ("kel", "Kelvarra Lakes", 230000, False, 1.28, 1.09, 1.10, 1.03, 1.40, 1.02),
    ("bri", "Brindleholt", 470000, True, 1.00, 1.00, 1.00, 1.00, 1.00, 1.00),
    ("gal", "Galvane", 710000, True, 0.92, 0.97, 0.97, 0.96, 0.92, 0.97),
    ("sel", "Selvasto Coast", 380000, False, 1.06, 1.02, 1.02, 1.02, 1.15, 0.98),
    ("zel", "Zelmorra Isles", 115000, False, 1.12, 1.15, 1.08, 1.18, 1.25, 0.96),
    ("dun", "Dunmarrow", 400000, True, 0.72, 0.94, 0.91, 0.97, 0.85, 0.86),
    ("net", "Nethercaul", 295000, True, 0.80, 0.96, 0.93, 0.99, 0.88, 0.90),
    ("yar", "Yarrowdeep", 265000, True, 0.86, 0.95, 0.95, 1.01, 0.92, 0.93),
    ("vel", "Velloran Plains", 345000, False, 0.64, 0.91, 0.87, 1.03, 0.82, 0.82),
    ("tar", "Tarnvick Uplands", 155000, False, 0.70, 0.99, 0.90, 1.08, 1.05, 0.84),
    ("fen", "Fenwyrd Marshes", 135000, False, 0.60, 0.90, 0.85, 1.06, 0.80, 0.79),
    ("ird", "Irdwyn Valley", 205000, False, 0.67, 0.92, 0.88, 1.04, 0.90, 0.83),
    ("quo", "Quorrin Forest", 175000, False, 0.75, 0.94, 0.90, 1.05, 0.95, 0.85),
]
ISLAND_REGIONS = {"zel"}  # goods carry a shipping premium
UTILITY_HEADINGS = {"water_supply", "electricity", "gas_heating"}  # priced in tariffs.csv


def kind_level(kind, region):
    """Returns the regional price level that applies to an item of `kind`."""
    code, _, _, _, rent, food, services, utility, tourism, _ = region
    island = 1.06 if code in ISLAND_REGIONS else 1.0
    if kind == "food":
        return food
    if kind == "rent":
        return rent
    if kind == "parking":  # land values, damped
        return rent ** 0.7
    if kind == "services":
        return services
    if kind == "goods":  # traded nationally: margins and shop rents only
        return (1.0 + 0.4 * (services - 1.0)) * island
    if kind == "utility":
        return utility
    if kind == "regulated":  # medicines: nationally negotiated prices
        return 1.0 + 0.15 * (services - 1.0)
    if kind == "local_transport":  # set by local authorities
        return 1.0 + 0.6 * (services - 1.0)
    if kind == "national":  # one national tariff, small local extras
        return 1.0 + 0.05 * (services - 1.0)
    if kind == "tourism":
        return tourism
    raise ValueError(kind)


# ---------------------------------------------------------------------------
# Classification and items. Each heading: code, national expenditure share
# (per cent of the covered budget), default kind, items. Each item: code,
# description, unit priced, national average price (talvo), optional kind.
# The first item of every heading is its anchor, priced in every region.
# ---------------------------------------------------------------------------
HEADINGS = [
    ("bread_cereals", 2.0, "food", [
        ("white_loaf", "white sandwich loaf, sliced, 800 g", "loaf", 2.10),
        ("wholemeal_loaf", "wholemeal bread, 500 g", "loaf", 2.40),
        ("rye_bread", "dark rye bread, 750 g", "loaf", 3.10),
        ("bread_rolls", "crusty bread rolls, pack of 6", "pack", 1.90),
        ("long_rice", "long-grain white rice, 1 kg", "pack", 2.30),
        ("spaghetti", "dried spaghetti, 500 g", "pack", 1.20),
        ("wheat_flour", "plain wheat flour, 1 kg", "pack", 0.95),
        ("oat_flakes", "rolled oat flakes, 500 g", "pack", 1.40),
        ("corn_flakes", "corn flakes breakfast cereal, 375 g", "box", 2.80),
        ("couscous", "couscous, 500 g", "pack", 1.70),
    ]),
    ("meat", 3.2, "food", [
        ("chicken_breast", "chicken breast fillets, fresh", "kg", 9.50),
        ("whole_chicken", "whole chicken, fresh, about 1.5 kg", "kg", 5.20),
        ("beef_mince", "minced beef, 15 % fat", "kg", 10.80),
        ("beef_steak", "beef sirloin steak", "kg", 29.00),
        ("pork_chops", "pork loin chops, bone-in", "kg", 8.90),
        ("pork_sausages", "pork sausages, pack of 8, 450 g", "pack", 3.90),
        ("cooked_ham", "cooked ham, sliced, 200 g", "pack", 2.70),
        ("lamb_leg", "leg of lamb, bone-in", "kg", 16.50),
        ("turkey_slices", "roast turkey breast slices, 150 g", "pack", 2.90),
    ]),
    ("fish_seafood", 0.9, "food", [
        ("white_fish_frozen", "frozen white fish fillets, 400 g", "pack", 5.20),
        ("salmon_fillet", "fresh salmon fillet", "kg", 22.00),
        ("canned_tuna", "canned tuna in brine, 160 g", "can", 1.60),
        ("smoked_mackerel", "smoked mackerel fillets, 200 g", "pack", 3.30),
        ("prawns_frozen", "frozen cooked prawns, 250 g", "pack", 4.90),
        ("fish_fingers", "breaded fish fingers, frozen, 10 pieces", "pack", 2.90),
    ]),
    ("dairy_eggs", 2.0, "food", [
        ("whole_milk", "fresh whole milk, 1 l", "carton", 1.05),
        ("skimmed_milk", "semi-skimmed milk, long-life, 1 l", "carton", 0.95),
        ("eggs", "eggs, medium, box of 10", "box", 2.60),
        ("butter", "salted butter, 250 g", "pack", 2.40),
        ("hard_cheese", "mature hard cheese", "kg", 11.50),
        ("natural_yoghurt", "natural yoghurt, 500 g", "pot", 1.30),
        ("cream", "single cream, 250 ml", "pot", 1.10),
        ("soft_cheese", "soft white cheese, 200 g", "pack", 1.90),
    ]),
    ("fruit", 1.2, "food", [
        ("apples", "dessert apples, loose", "kg", 2.30),
        ("bananas", "bananas, loose", "kg", 1.60),
        ("oranges", "oranges, loose", "kg", 2.10),
        ("grapes", "seedless white grapes, 500 g", "punnet", 2.60),
        ("strawberries", "strawberries, 400 g", "punnet", 3.20),
        ("lemons", "lemons, net of 4", "net", 1.50),
        ("raisins", "seedless raisins, 500 g", "pack", 2.90),
        ("pears", "conference pears, loose", "kg", 2.40),
        ("avocados", "ripe avocados, pack of 2", "pack", 2.20),
    ]),
    ("vegetables", 1.6, "food", [
        ("potatoes", "white potatoes, bag of 2.5 kg", "bag", 2.80),
        ("onions", "brown onions, loose", "kg", 1.20),
        ("carrots", "carrots, loose", "kg", 1.00),
        ("tomatoes", "round tomatoes, loose", "kg", 2.90),
        ("cucumber", "cucumber, whole", "each", 0.80),
        ("lettuce", "iceberg lettuce", "each", 0.95),
        ("peppers", "sweet peppers, mixed, pack of 3", "pack", 2.20),
        ("frozen_peas", "frozen garden peas, 1 kg", "bag", 2.10),
        ("canned_tomatoes", "chopped tomatoes, canned, 400 g", "can", 0.75),
        ("mushrooms", "white button mushrooms, 250 g", "punnet", 1.40),
        ("garlic", "garlic bulbs, pack of 3", "pack", 1.10),
    ]),
    ("sugar_confectionery", 1.0, "food", [
        ("white_sugar", "white granulated sugar, 1 kg", "pack", 1.20),
        ("milk_chocolate", "milk chocolate bar, 100 g", "bar", 1.30),
        ("honey", "clear honey, 340 g jar", "jar", 3.60),
        ("strawberry_jam", "strawberry jam, 450 g jar", "jar", 2.10),
        ("ice_cream", "vanilla ice cream, 1 l tub", "tub", 3.40),
        ("boiled_sweets", "fruit boiled sweets, 200 g bag", "bag", 1.50),
        ("digestive_biscuits", "digestive biscuits, 400 g", "pack", 1.35),
    ]),
    ("non_alcoholic_beverages", 1.3, "food", [
        ("ground_coffee", "ground coffee, medium roast, 250 g", "pack", 3.90),
        ("tea_bags", "black tea bags, box of 80", "box", 2.50),
        ("instant_coffee", "instant coffee, 100 g jar", "jar", 4.60),
        ("orange_juice", "orange juice, not from concentrate, 1 l", "carton", 2.20),
        ("cola", "cola soft drink, 1.5 l bottle", "bottle", 1.70),
        ("mineral_water", "still mineral water, 6 x 1.5 l", "pack", 2.60),
        ("fruit_squash", "fruit squash concentrate, 1 l", "bottle", 1.80),
        ("sparkling_water", "sparkling spring water, 1 l bottle", "bottle", 0.65),
    ]),
    ("garments", 3.6, "goods", [
        ("mens_jeans", "men's denim jeans, regular fit", "pair", 45.00),
        ("womens_dress", "women's cotton summer dress", "each", 39.00),
        ("mens_shirt", "men's long-sleeved cotton shirt", "each", 28.00),
        ("womens_jumper", "women's knitted jumper, wool blend", "each", 35.00),
        ("childs_tshirt", "child's cotton T-shirt, age 6-8", "each", 8.50),
        ("winter_coat", "adult winter coat, padded", "each", 95.00),
        ("socks", "cotton socks, pack of 5 pairs", "pack", 9.00),
        ("tights", "women's tights, 40 denier, 2 pairs", "pack", 6.50),
        ("dry_cleaning", "dry cleaning of a two-piece suit", "service", 14.00, "services"),
    ]),
    ("footwear", 1.0, "goods", [
        ("trainers", "adult running trainers", "pair", 65.00),
        ("mens_shoes", "men's leather lace-up shoes", "pair", 80.00),
        ("womens_boots", "women's ankle boots, leather", "pair", 95.00),
        ("childs_shoes", "children's school shoes", "pair", 38.00),
        ("slippers", "adult house slippers", "pair", 15.00),
        ("shoe_repair", "heel replacement, pair of shoes", "service", 16.00, "services"),
    ]),
    ("actual_rents", 17.0, "rent", [
        ("flat_2room", "two-room flat, unfurnished, about 55 m2", "month", 720.0),
        ("flat_1room", "studio flat, unfurnished, about 35 m2", "month", 520.0),
        ("flat_3room", "three-room flat, unfurnished, about 75 m2", "month", 930.0),
        ("flat_4room", "four-room flat, unfurnished, about 95 m2", "month", 1150.0),
        ("house_terraced", "three-bedroom terraced house, unfurnished", "month", 1250.0),
        ("house_detached", "four-bedroom detached house, unfurnished", "month", 1750.0),
        ("room_shared", "furnished room in a shared flat", "month", 380.0),
        ("garage", "lock-up garage, single", "month", 85.0, "parking"),
    ]),
    ("maintenance_repair", 1.6, "services", [
        ("plumber_callout", "plumber, call-out and first hour", "visit", 75.00),
        ("electrician_hour", "electrician, hourly rate", "hour", 55.00),
        ("painter_hour", "painter and decorator, hourly rate", "hour", 38.00),
        ("locksmith", "locksmith, lock change on front door", "service", 110.00),
        ("wall_paint", "white emulsion wall paint, 10 l", "tin", 42.00, "goods"),
        ("mixer_tap", "replacement kitchen mixer tap", "each", 65.00, "goods"),
        ("cement", "ready-mix cement, 25 kg bag", "bag", 9.50, "goods"),
        ("wallpaper", "patterned wallpaper, 10 m roll", "roll", 18.00, "goods"),
    ]),
    ("water_supply", 1.2, "utility", [
        ("water_standard", "water and sewerage, standing charge plus 10 m3", "month", 42.00),
        ("water_m3", "water supply beyond the allowance", "m3", 2.10),
        ("refuse_collection", "household refuse collection charge", "month", 18.00),
        ("meter_service", "water meter reading and service fee", "quarter", 12.00),
    ]),
    ("electricity", 2.6, "utility", [
        ("elec_standard", "electricity, standard tariff, 250 kWh", "month", 78.00),
        ("elec_kwh", "electricity, standard tariff, unit rate", "kWh", 0.29),
        ("elec_renewable", "electricity, renewable tariff, 250 kWh", "month", 84.00),
        ("elec_prepayment", "electricity, prepayment meter, 250 kWh", "month", 86.00),
    ]),
    ("gas_heating", 2.0, "utility", [
        ("gas_standard", "mains gas, standard tariff, 900 kWh", "month", 72.00),
        ("heating_oil", "heating oil, 1000 l delivered", "delivery", 980.00, "goods"),
        ("firewood", "seasoned firewood logs, 1 m3", "m3", 120.00, "goods"),
        ("wood_pellets", "wood pellets, 15 kg bag", "bag", 6.50, "goods"),
        ("bottled_gas", "bottled gas refill, 13 kg cylinder", "cylinder", 32.00, "goods"),
        ("boiler_service", "annual boiler service", "service", 95.00, "services"),
    ]),
    ("medicines", 1.4, "regulated", [
        ("paracetamol", "paracetamol tablets, 500 mg, pack of 16", "pack", 1.20),
        ("ibuprofen", "ibuprofen tablets, 200 mg, pack of 24", "pack", 2.40),
        ("cough_syrup", "cough syrup, 200 ml", "bottle", 5.80),
        ("antihistamine", "antihistamine tablets, pack of 30", "pack", 4.90),
        ("multivitamins", "multivitamin tablets, pack of 60", "pack", 7.50),
        ("plasters", "adhesive plasters, assorted, box of 40", "box", 3.20),
        ("prescription_charge", "prescription charge per item", "item", 9.00, "national"),
        ("blood_pressure_monitor", "upper-arm blood pressure monitor", "each", 45.00, "goods"),
    ]),
    ("medical_services", 1.6, "services", [
        ("gp_consultation", "general practitioner consultation, private", "visit", 65.00),
        ("specialist_visit", "specialist consultation, first visit", "visit", 140.00),
        ("physiotherapy", "physiotherapy session, 45 minutes", "session", 55.00),
        ("eye_test", "eye examination at an optician", "test", 35.00),
        ("blood_test", "blood test, full blood count, private laboratory", "test", 40.00),
        ("spectacles", "single-vision spectacles, basic frame", "pair", 120.00, "goods"),
    ]),
    ("dental_services", 0.8, "services", [
        ("dental_checkup", "dental check-up and cleaning", "visit", 70.00),
        ("filling", "white composite filling, one tooth", "treatment", 110.00),
        ("extraction", "simple tooth extraction", "treatment", 95.00),
        ("crown", "porcelain dental crown", "treatment", 650.00),
        ("dental_xray", "dental X-ray, two bitewings", "treatment", 30.00),
    ]),
    ("vehicle_fuel", 3.4, "goods", [
        ("petrol", "unleaded petrol, 95 octane", "litre", 1.68),
        ("diesel", "diesel fuel", "litre", 1.61),
        ("autogas", "autogas (LPG)", "litre", 0.82),
        ("rapid_charging", "public rapid charging for electric cars", "kWh", 0.55),
        ("engine_oil", "engine oil, 5W-30, 5 l", "can", 38.00),
        ("screen_wash", "screen wash concentrate, 5 l", "can", 6.50),
    ]),
    ("vehicle_maintenance", 2.2, "services", [
        ("car_service", "annual service, small family car", "service", 210.00),
        ("tyre_fitted", "mid-range tyre, fitted and balanced", "tyre", 95.00),
        ("car_wash", "automatic car wash, standard", "wash", 8.00),
        ("roadworthiness_test", "annual roadworthiness test", "test", 55.00, "national"),
        ("brake_pads", "front brake pads replaced, small car", "job", 160.00),
        ("parking_day", "town-centre car park, full day", "day", 12.00, "parking"),
    ]),
    ("local_fares", 1.3, "local_transport", [
        ("bus_single", "single bus fare, town-centre journey", "ticket", 2.00),
        ("bus_day", "bus day ticket, whole town network", "ticket", 5.50),
        ("monthly_pass", "monthly public transport pass, adult", "pass", 62.00),
        ("taxi_5km", "taxi fare, 5 km daytime journey", "journey", 14.00, "services"),
        ("tram_single", "tram or light-rail single fare", "ticket", 2.20),
        ("bike_hire_day", "city bicycle hire, one day", "day", 9.00),
    ]),
    ("rail_fares", 1.0, "national", [
        ("rail_50km", "second-class rail ticket, 50 km, off-peak", "ticket", 11.00),
        ("rail_200km", "second-class rail ticket, 200 km, advance", "ticket", 32.00),
        ("rail_season", "monthly rail season ticket, 30 km commute", "pass", 145.00),
        ("coach_200km", "long-distance coach ticket, 200 km", "ticket", 18.00),
        ("railcard", "annual discount railcard, adult", "card", 35.00),
    ]),
    ("phone_internet", 2.6, "national", [
        ("mobile_plan", "mobile phone plan, unlimited calls, 20 GB data", "month", 18.00),
        ("broadband", "home broadband, 100 Mbit/s", "month", 32.00),
        ("landline", "landline line rental", "month", 19.00),
        ("prepaid_topup", "prepaid mobile top-up voucher", "voucher", 10.00),
        ("smartphone", "mid-range smartphone, 128 GB", "each", 320.00, "goods"),
        ("tv_package", "pay-TV basic channel package", "month", 24.00),
    ]),
    ("postal_services", 0.3, "national", [
        ("letter_stamp", "first-class letter stamp, up to 100 g", "stamp", 1.10),
        ("parcel_2kg", "domestic parcel, up to 2 kg", "parcel", 7.90),
        ("registered_letter", "registered letter, domestic", "letter", 5.60),
        ("courier_next_day", "next-day courier, small parcel", "parcel", 14.50, "services"),
    ]),
    ("recreational_services", 3.0, "services", [
        ("cinema_ticket", "cinema ticket, adult, evening", "ticket", 11.00),
        ("swimming_pool", "public swimming pool, adult entry", "entry", 5.50),
        ("gym_month", "gym membership, monthly", "month", 38.00),
        ("museum_entry", "museum entry, adult", "entry", 9.00),
        ("football_match", "football league match ticket, standard seat", "ticket", 28.00),
        ("theatre_ticket", "theatre ticket, mid-price seat", "ticket", 42.00),
        ("music_lesson", "private music lesson, 45 minutes", "lesson", 32.00),
        ("bowling_game", "ten-pin bowling, one game, adult", "game", 7.50),
    ]),
    ("books_newspapers", 1.0, "goods", [
        ("paperback_novel", "paperback novel, new release", "each", 11.00),
        ("daily_newspaper", "national daily newspaper, weekday", "copy", 1.80, "national"),
        ("magazine", "monthly general-interest magazine", "copy", 5.50, "national"),
        ("picture_book", "children's picture book, hardback", "each", 9.50),
        ("notebook", "A4 ruled notebook, 80 sheets", "each", 2.40),
        ("ballpoint_pens", "ballpoint pens, pack of 10", "pack", 3.20),
    ]),
    ("sports_equipment", 1.2, "goods", [
        ("football", "football, size 5", "each", 22.00),
        ("tennis_racket", "tennis racket, intermediate", "each", 75.00),
        ("yoga_mat", "yoga mat, 6 mm", "each", 24.00),
        ("bicycle", "adult hybrid bicycle", "each", 480.00),
        ("camping_tent", "two-person camping tent", "each", 110.00),
        ("swim_goggles", "swimming goggles, adult", "pair", 12.00),
        ("running_shorts", "running shorts, adult", "pair", 19.00),
    ]),
    ("restaurants_cafes", 6.0, "services", [
        ("cappuccino", "cappuccino in a cafe, regular", "cup", 3.20),
        ("set_lunch", "set lunch, two courses, casual restaurant", "meal", 16.00),
        ("pizza", "margherita pizza in a pizzeria", "pizza", 11.50),
        ("burger_meal", "fast-food burger meal with fries and drink", "meal", 8.90),
        ("draught_beer", "draught beer in a bar, 0.5 l", "glass", 4.80),
        ("dinner_3course", "three-course dinner, mid-range restaurant, one person", "meal", 42.00),
        ("takeaway_sandwich", "takeaway sandwich, ready-made", "each", 4.20),
        ("canteen_meal", "workplace canteen hot meal", "meal", 6.50),
    ]),
    ("accommodation", 2.2, "tourism", [
        ("hotel_3star", "hotel room, three-star, double, one night", "night", 115.00),
        ("hotel_budget", "budget hotel room, double, one night", "night", 72.00),
        ("guest_house", "guest house room with breakfast, double, one night", "night", 85.00),
        ("hostel_bed", "hostel dormitory bed, one night", "night", 28.00),
        ("campsite", "campsite pitch for a tent, two adults, one night", "night", 22.00),
        ("holiday_flat", "self-catering holiday flat, one week", "week", 540.00),
    ]),
]

# The tree written to classification.yaml; leaves are the heading codes above.
# transport holds a nested aggregate in the list-with-one-key-mapping form.
CLASSIFICATION = [
    ("food", ["bread_cereals", "meat", "fish_seafood", "dairy_eggs", "fruit", "vegetables",
              "sugar_confectionery", "non_alcoholic_beverages"]),
    ("clothing", ["garments", "footwear"]),
    ("housing", ["actual_rents", "maintenance_repair"]),
    ("utilities", ["water_supply", "electricity", "gas_heating"]),
    ("health", ["medicines", "medical_services", "dental_services"]),
    ("transport", ["vehicle_fuel", "vehicle_maintenance",
                   ("public_transport", ["local_fares", "rail_fares"])]),
    ("communication", ["phone_internet", "postal_services"]),
    ("recreation", ["recreational_services", "books_newspapers", "sports_equipment"]),
    ("restaurants_hotels", ["restaurants_cafes", "accommodation"]),
]

OCCUPATIONS = [
    # title, national average hourly wage (talvo), weight in urban, rural regions
    ("nurse", 21.50, 5, 5),
    ("bus driver", 17.00, 4, 2),
    ("primary school teacher", 24.00, 5, 5),
    ("software developer", 36.00, 4, 2),
    ("shop assistant", 12.80, 8, 7),
    ("cleaner", 11.90, 6, 5),
    ("electrician", 22.00, 3, 3),
    ("accountant", 30.00, 4, 2),
    ("care worker", 12.50, 6, 7),
    ("chef", 15.50, 4, 3),
    ("warehouse operative", 13.20, 5, 3),
    ("police officer", 23.50, 2, 2),
    ("pharmacist", 31.00, 1, 1),
    ("office administrator", 16.00, 7, 4),
    ("farm worker", 12.00, 1, 5),
    ("civil engineer", 33.00, 2, 1),
    ("hairdresser", 13.00, 2, 2),
    ("lorry driver", 17.50, 3, 4),
    ("librarian", 18.00, 1, 1),
    ("general practitioner", 52.00, 1, 1),
    ("waiter", 11.80, 5, 4),
    ("plumber", 20.50, 2, 2),
]
NUM_WAGE_RECORDS = 3000

# Spreads, log points.
REGION_HEADING_SD = 0.015   # heading-specific regional deviation
REGION_ITEM_SD = 0.035      # item x region interaction (local brands, shop mix)
QUOTE_SD = {"rent": 0.10, "parking": 0.10, "services": 0.07, "tourism": 0.09}
DEFAULT_QUOTE_SD = 0.05
# Chance that a non-anchor cell is priced: about 70 % of all cells with anchors.
PRICED_CHANCE_URBAN = 0.72
PRICED_CHANCE_RURAL = 0.58
REPRESENTATIVE_CHANCE = 1.0 / 3.0
BUDGET_PER_HEAD = 16500.0   # talvo a year on the covered headings, national


def round_price(price, kind):
    if kind in ("rent", "parking") and price >= 50:
        return "%d" % round(price)
    if price < 1.0:
        return "%.3f" % price
    return "%.2f" % price


def write_csv(path, header, rows, delimiter=","):
    with open(path, "w", newline="", encoding="utf-8") as f:
        writer = csv.writer(f, lineterminator="\n", delimiter=delimiter)
        writer.writerow(header)
        writer.writerows(rows)


def classification_yaml():
    lines = ["# Classification of the Talvoria demo survey: aggregates and their basic headings.",
             "all:"]
    for group, children in CLASSIFICATION:
        if all(isinstance(c, str) for c in children):
            lines.append("  %s: [%s]" % (group, ", ".join(children)))
            continue
        lines.append("  %s:" % group)
        for child in children:
            if isinstance(child, str):
                lines.append("    - %s" % child)
            else:
                lines.append("    - %s: [%s]" % (child[0], ", ".join(child[1])))
    return "\n".join(lines) + "\n"


def main():
    out = sys.argv[1] if len(sys.argv) > 1 else os.path.dirname(os.path.abspath(__file__))
    os.makedirs(out, exist_ok=True)
    rng = random.Random(SEED)

    # Check the tree lists every heading exactly once.
    listed = []
    for _, children in CLASSIFICATION:
        for child in children:
            listed.extend([child] if isinstance(child, str) else child[1])
    assert sorted(listed) == sorted(h[0] for h in HEADINGS), "classification and headings differ"

    # --- items.csv
    items = []  # (code, heading, description, unit, base price, kind, is anchor)
    for heading, _, heading_kind, heading_items in HEADINGS:
        for k, item in enumerate(heading_items):
            code, description, unit, base = item[:4]
            kind = item[4] if len(item) > 4 else heading_kind
            items.append((code, heading, description, unit, base, kind, k == 0))
    assert len({i[0] for i in items}) == len(items), "duplicate item code"
    write_csv(os.path.join(out, "items.csv"), ["item", "heading", "description", "unit"],
              [(i[0], i[1], i[2], i[3]) for i in items])

    # --- regions.csv
    write_csv(os.path.join(out, "regions.csv"), ["region", "name", "population"],
              [(r[0], r[1], r[2]) for r in REGIONS])

    # --- prices.csv
    heading_effect = {}
    for region in REGIONS:
        for heading in HEADINGS:
            heading_effect[region[0], heading[0]] = rng.gauss(0.0, REGION_HEADING_SD)
    # Cells: anchors everywhere; other cells by chance; each item in >= 2 regions.
    priced = {}
    for region in REGIONS:
        chance = PRICED_CHANCE_URBAN if region[3] else PRICED_CHANCE_RURAL
        for item in items:
            priced[region[0], item[0]] = item[6] or rng.random() < chance
    for item in items:
        holders = [r[0] for r in REGIONS if priced[r[0], item[0]]]
        while len(holders) < 2:
            extra = rng.choice([r[0] for r in REGIONS if r[0] not in holders])
            priced[extra, item[0]] = True
            holders.append(extra)
    # Representative flags per cell; every region x heading gets at least one.
    representative = {}
    for region in REGIONS:
        for heading, _, _, heading_items in HEADINGS:
            codes = [i[0] for i in heading_items if priced[region[0], i[0]]]
            flags = [rng.random() < REPRESENTATIVE_CHANCE for _ in codes]
            if not any(flags):
                flags[rng.randrange(len(codes))] = True
            for code, flag in zip(codes, flags):
                representative[region[0], code] = flag
    price_rows = []
    for region in REGIONS:
        for item in items:
            code, heading, _, _, base, kind, _ = item
            if not priced[region[0], code]:
                continue
            log_mean = (math.log(base) + math.log(kind_level(kind, region)) +
                        heading_effect[region[0], heading] + rng.gauss(0.0, REGION_ITEM_SD))
            num_quotes = rng.randint(3, 6) if region[0] == "cap" else rng.randint(2, 6)
            sd = QUOTE_SD.get(kind, DEFAULT_QUOTE_SD)
            flag = "1" if representative[region[0], code] else "0"
            for q in range(num_quotes):
                price = math.exp(log_mean + rng.gauss(0.0, sd))
                price_rows.append((region[0], code, round_price(price, kind), flag, "o%d" % (q + 1)))
    # Two recording errors are planted on purpose, for the outlier screen to
    # find (see README.md): in 'net' the box of ten eggs was priced per egg
    # (every quote of the cell a tenth of what it should be), and in 'vel' one
    # quote of whole milk was keyed with the decimal point one place off.
    # They change no random draw, so every other number stays as it was.
    for k, (region, code, price, flag, outlet) in enumerate(price_rows):
        if (region, code) == ("net", "eggs"):
            price_rows[k] = (region, code, "%.3f" % (float(price) / 10.0), flag, outlet)
    milk = [k for k, row in enumerate(price_rows) if row[:2] == ("vel", "whole_milk")]
    region, code, price, flag, outlet = price_rows[milk[2]]
    price_rows[milk[2]] = (region, code, "%.2f" % (float(price) * 10.0), flag, outlet)
    # The island group's rents were not surveyed (a partial basket, see
    # README.md): its rent quotes are left out after every draw, so every
    # other number stays as it was; its spending on rent stays in.
    rent_items = {i[0] for i in items if i[1] == "actual_rents"}
    price_rows = [row for row in price_rows if not (row[0] == "zel" and row[1] in rent_items)]
    # Sources. Rents come from the housing register as hedonic parities with
    # standard errors (rent_parities.csv, below), not as quotes, so the rent
    # quotes drawn above are left out of the price files after every draw.
    # Utility tariffs come from the regulator's tariff file (tariffs.csv) in
    # its own layout: ';' between fields, decimal comma, its own headers.
    price_rows = [row for row in price_rows if row[1] not in rent_items]
    utility_items = {i[0] for i in items if i[1] in UTILITY_HEADINGS}
    tariff_rows = [(row[0], row[1], row[2].replace(".", ","), row[4])
                   for row in price_rows if row[1] in utility_items]
    price_rows = [row for row in price_rows if row[1] not in utility_items]
    write_csv(os.path.join(out, "prices.csv"),
              ["region", "item", "price", "representative", "outlet"], price_rows)
    write_csv(os.path.join(out, "tariffs.csv"), ["area", "tariff", "charge", "supplier"],
              tariff_rows, delimiter=";")

    # --- expenditure.csv: shares tilt towards housing where rents are high,
    # towards food where incomes are low (Engel), towards eating out and leisure
    # where incomes are high, towards cars in the countryside.
    base_total = sum(h[1] for h in HEADINGS)
    expenditure_rows = []
    for region in REGIONS:
        code, _, population, urban, rent, food, _, _, _, income = region
        weights = []
        for heading, share, kind, _ in HEADINGS:
            w = share / base_total
            if heading == "actual_rents":
                w *= rent ** 0.7
            elif kind == "food":
                w *= food / income ** 0.4
            elif heading in ("restaurants_cafes", "accommodation", "recreational_services",
                             "sports_equipment"):
                w *= income ** 0.5
            elif heading in ("vehicle_fuel", "vehicle_maintenance"):
                w *= 0.75 if code == "cap" else (1.0 if urban else 1.25)
            elif heading == "local_fares":
                w *= 1.3 if urban else 0.6
            w *= math.exp(rng.gauss(0.0, 0.04))
            weights.append(w)
        total = sum(weights)
        budget = population * BUDGET_PER_HEAD * income
        for (heading, _, _, _), w in zip(HEADINGS, weights):
            expenditure_rows.append((code, heading, "%d" % round(budget * w / total)))
    write_csv(os.path.join(out, "expenditure.csv"), ["region", "heading", "expenditure"],
              expenditure_rows)

    # --- wages.csv: records per region in proportion to population (at least
    # 60 each); regional wage level follows local services prices and incomes
    # only partly, so the capital's higher wages do not fully offset its prices.
    total_population = sum(r[2] for r in REGIONS)
    counts = [max(60, NUM_WAGE_RECORDS * r[2] // total_population) for r in REGIONS]
    k = 0
    while sum(counts) != NUM_WAGE_RECORDS:  # settle the remainder on the largest regions
        step = 1 if sum(counts) < NUM_WAGE_RECORDS else -1
        counts[k % 3] += step
        k += 1
    wage_rows = []
    record = 0
    for region, count in zip(REGIONS, counts):
        code, _, _, urban, _, _, services, _, _, income = region
        wage_level = 1.0 + 0.3 * (services - 1.0) + 0.15 * (income - 1.0)
        weights = [o[2] if urban else o[3] for o in OCCUPATIONS]
        for _ in range(count):
            title, base_wage = rng.choices(OCCUPATIONS, weights=weights)[0][:2]
            hourly = base_wage * wage_level * math.exp(rng.gauss(0.0, 0.18))
            if rng.random() < 0.78:
                hours = min(2100.0, max(1500.0, rng.gauss(1780.0, 90.0)))
            else:
                hours = rng.uniform(600.0, 1400.0)
            record += 1
            wage_rows.append(("w%04d" % record, code, title, "%.2f" % hourly,
                              "%d" % round(round(hourly, 2) * hours)))
    write_csv(os.path.join(out, "wages.csv"),
              ["record_id", "region", "occupation", "hourly_wage", "annual_earnings"], wage_rows)

    # --- rent_parities.csv: the housing register's hedonic rent parities
    # (national = 100) with their standard errors, drawn from their own random
    # stream so every number above stays as it was. The island group is not
    # in the register (its rent parity is imputed, see config/demo.yaml).
    rent_rng = random.Random(SEED + 1)
    rent_rows = []
    for region in REGIONS:
        code, _, population, _, rent = region[:5]
        if code in ISLAND_REGIONS:
            continue
        log_se = 0.015 + 0.04 * math.sqrt(115000.0 / population)
        level = rent * math.exp(heading_effect[code, "actual_rents"] + rent_rng.gauss(0.0, log_se))
        rent_rows.append(("actual_rents", code, "%.2f" % (100.0 * level), "%.4f" % log_se))
    write_csv(os.path.join(out, "rent_parities.csv"), ["heading", "region", "parity", "log_se"],
              rent_rows)

    # --- classification.yaml
    with open(os.path.join(out, "classification.yaml"), "w", encoding="utf-8") as f:
        f.write(classification_yaml())

    print("wrote %d regions, %d headings, %d items, %d quotes and %d tariffs, %d rent parities, "
          "%d wage records to %s"
          % (len(REGIONS), len(HEADINGS), len(items), len(price_rows), len(tariff_rows),
             len(rent_rows), len(wage_rows), out))


if __name__ == "__main__":
    main()
