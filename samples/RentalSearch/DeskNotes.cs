namespace RentalSearch;

/// <summary>
/// Notes from the co-op's rental desk, each with a paraphrase written to share as few words as possible: the
/// paraphrase is the query and its note should come first.
/// </summary>
public static class DeskNotes
{
    public static readonly (string Note, string Paraphrase)[] Pairs =
    [
        ("The stove's gas valve sticks when the temperature drops below freezing.", "In icy conditions the cooker's fuel knob jams."),
        ("Return kayaks rinsed with fresh water after any trip on salt water.", "Boats used at sea must be washed with tap water before you bring them back."),
        ("Tent poles bent by wind are repaired free of charge once per season.", "We fix storm-damaged shelter frames at no cost, one time each year."),
        ("Sleeping bags are washed and dried between every rental.", "Each bedroll gets laundered before the next member takes it."),
        ("Headlamp batteries are not included; bring three AAA cells.", "The forehead lights come without power cells, so pack your own small batteries."),
        ("Late returns cost half the daily rate for each extra day.", "Bringing gear back after the due date adds fifty percent of a day's fee per day."),
        ("Members can reserve snowshoes up to two weeks ahead in January.", "During the first month of the year you may book winter footwear fourteen days early."),
        ("The water filter cartridge must be replaced after about 1,000 litres.", "Swap the purifier's insert once it has cleaned roughly a thousand liters."),
        ("Climbing harnesses older than five years are retired and cut up.", "Rope-climbing belts past their fifth birthday are destroyed and taken out of service."),
        ("Children under twelve must wear a life jacket in any boat we rent.", "Kids younger than 12 need a flotation vest on every rented craft."),
        ("Lost stuff sacks are charged at eight per sack.", "If you misplace a storage bag we bill you 8 for it."),
        ("Our warehouse is closed on public holidays but the drop box stays open.", "On national days off the depot shuts, though you can still leave returns in the slot."),
        ("Trekking poles are sized at the counter to the member's height.", "Staff adjust hiking sticks to how tall you are when you pick them up."),
        ("Camp chairs with torn fabric should be reported, not taxed as damage.", "Tell us about ripped seat cloth; you won't be charged for it."),
        ("Group bookings of more than ten items need a deposit.", "Renting over a dozen pieces for a party requires money paid up front."),
        ("Wet tents must be unpacked and hung to dry within a day of return.", "A damp shelter has to be spread out to air within 24 hours after it comes back."),
        ("Fuel canisters cannot be returned once opened.", "We don't take back gas cartridges that have been used."),
        ("Backpacks come with a rain cover in the lid pocket.", "Every rucksack has a waterproof hood stored in its top compartment."),
        ("Canoe paddles are shorter for the bow seat than for the stern.", "The front paddler gets a smaller oar than the one steering at the back."),
        ("Avalanche gear may only be rented after the safety course.", "You need to finish the snow-slide training before borrowing rescue equipment."),
        ("Insurance covers theft from a locked car but not from an open campsite.", "Our cover pays if things are stolen from a locked vehicle, not if taken from an unattended pitch."),
        ("The online catalogue updates stock counts every fifteen minutes.", "Availability on the website refreshes four times an hour."),
        ("Volunteers who help at the spring sale rent free for a weekend.", "People who staff the seasonal sell-off get two days of gear at no cost."),
        ("Mildew on a sleeping pad means it goes to the deep clean queue.", "Mould spots on a ground mattress send it for intensive washing."),
        ("Please do not store gear with food inside; mice chew through packs.", "Leaving snacks in bags invites rodents that gnaw holes in them."),
        ("Dog trailers are only rented with a signed pet waiver.", "You must sign an animal liability form before taking the pet cart."),
        ("The repair bench lends tools to members on Thursday evenings.", "Every Thursday night the workshop lets members borrow its equipment."),
        ("Snowshoe bindings loosen in wet snow; carry a spare strap.", "In slushy conditions the foot straps slip, so take an extra one."),
        ("Kayak spray skirts must match the cockpit size on the tag.", "The deck cover has to fit the seat opening listed on the label."),
        ("Members earn one free rental day for every ten paid days.", "After ten days of paid hire you get a day on the house."),
    ];
}
